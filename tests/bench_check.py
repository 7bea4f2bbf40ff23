"""coexist tests: the benchmark program runs and writes a valid report (not a timing test: no
figure is compared with a speed). coexist-bench --quick --kernels --json F must exit 0 and F must
be JSON by RFC 8259 (Bray 2017, "The JavaScript Object Notation (JSON) Data Interchange Format"),
which has no NaN or Infinity, so the strict parse below rejects them; every figure is a positive
finite number or null (not measured on this CPU). A bad option exits 2.

usage: bench_check.py BENCH WORKDIR"""
import json
import math
import os
import subprocess
import sys


def reject(name):
    raise ValueError("not JSON: " + name)


def figures(node, path, out):
    if isinstance(node, dict):
        for k, v in node.items():
            figures(v, path + "." + k, out)
    elif isinstance(node, list):
        for i, v in enumerate(node):
            figures(v, "%s[%d]" % (path, i), out)
    elif isinstance(node, (int, float)) and not isinstance(node, bool):
        out.append((path, node))


def main():
    bench, work = sys.argv[1], sys.argv[2]
    out = os.path.join(work, "bench_check.json")
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    run = subprocess.run([bench, "--quick", "--kernels", "--json", out], env=env,
                         capture_output=True, text=True, timeout=600)
    fails = 0

    def check(name, ok, detail=""):
        nonlocal fails
        print("%s: %s %s" % ("PASS" if ok else "FAIL", name, detail))
        fails += 0 if ok else 1

    check("coexist-bench --quick --kernels exits 0", run.returncode == 0, run.stderr[-300:])
    if run.returncode == 0:
        with open(out) as f:
            text = f.read()
        try:
            doc = json.loads(text, parse_constant=reject)
            check("the report is strict JSON (RFC 8259: no NaN or Infinity)", True)
        except ValueError as e:
            doc = None
            check("the report is strict JSON (RFC 8259: no NaN or Infinity)", False, str(e))
        if doc is not None:
            k = doc.get("kernels", [])
            check("one kernel record at N = 1000", len(k) == 1 and k[0].get("nodes") == 1000)
            want = ["drive_ns_node_stage", "probe_ns_node_stage", "tanh_ns",
                    "bound_ns_node_stage", "dgemm_gflops", "gram_gflops"]
            check("the kernel record has its figures", all(w in k[0] for w in want) if k else False)
            nums = []
            figures(doc, "", nums)
            bad = [p for p, v in nums if not (math.isfinite(v) and v > 0)]
            check("every figure is positive and finite", not bad and len(nums) > 20,
                  "%d figures; bad: %s" % (len(nums), bad[:5]))
    bad_opt = subprocess.run([bench, "--no-such-option"], capture_output=True, text=True)
    check("a bad option exits 2 with the usage", bad_opt.returncode == 2 and
          "usage" in bad_opt.stderr)
    print("%d failed" % fails)
    return 1 if fails else 0


if __name__ == "__main__":
    sys.exit(main())
