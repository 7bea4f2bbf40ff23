/* coexist: families of tasks for capacity studies, expanded into single task specs.
 *
 * A family places k copies of one template so that a single number, the spacing, sets how far
 * apart (and so how overlapping) the attractors are:
 *   cycles-line    centre_x of copy i = (i - (k-1)/2) spacing, i = 0..k-1 (centred on 0);
 *   cycles-ring    centre of copy i = spacing (cos(2 pi i / k), sin(2 pi i / k));
 *   flow-shifted   shift_x of copy i = (i - (k-1)/2) spacing;
 *   flow-mirrored  copy i is mirrored (u -> -u) when i is odd; pair j = floor(i/2) has
 *                  shift_x = (j - (p-1)/2) spacing with p = ceil(k/2) pairs.
 * Only the coordinates named are overwritten; the template's other centre/shift coordinates are
 * kept. Cycle rotation senses: alternate gives +1, -1, +1, ...; otherwise senses[i] (0 = +1); a
 * copy's speed is sense * |template speed|. Senses do not apply to flow families. This is
 * plain geometry of our own; no published method is implemented here.
 */
#include <math.h>
#include <stdio.h>

#include "coexist/error.h"
#include "coexist/task.h"

static int name_copy(cx_task_spec *t, const char *base, int i)
{
    int rc = CX_OK;
    int w = snprintf(t->name, sizeof t->name, "%s-%d", base, i);
    CX_REQUIRE(w > 0 && (size_t)w < sizeof t->name, CX_ERR_INVALID,
               "family %s: the copy names would be longer than %d characters", base,
               CX_NAME_LEN - 1);
done:
    return rc;
}

int cx_family_expand(const cx_family_spec *f, cx_task_spec *tasks)
{
    int rc = CX_OK;
    CX_REQUIRE(f != NULL && tasks != NULL, CX_ERR_INTERNAL, "cx_family_expand: NULL argument");
    const int k = f->count;
    const char *base = f->base.name;
    CX_REQUIRE(k >= 1 && k <= CX_MAX_TASKS, CX_ERR_INVALID, "family %s: count %d is outside 1..%d",
               base, k, CX_MAX_TASKS);
    CX_REQUIRE(isfinite(f->spacing), CX_ERR_INVALID, "family %s: spacing %g is not finite", base,
               f->spacing);
    const int cycles = f->kind == CX_FAMILY_CYCLES_LINE || f->kind == CX_FAMILY_CYCLES_RING;
    const int flows = f->kind == CX_FAMILY_FLOW_SHIFTED || f->kind == CX_FAMILY_FLOW_MIRRORED;
    CX_REQUIRE(cycles || flows, CX_ERR_INVALID, "family %s: unknown kind %d", base, f->kind);
    CX_REQUIRE(!cycles || f->base.kind == CX_TASK_CYCLE, CX_ERR_INVALID,
               "family %s: a cycles family needs a cycle template", base);
    CX_REQUIRE(!flows || f->base.kind == CX_TASK_FLOW || f->base.kind == CX_TASK_FILE,
               CX_ERR_INVALID, "family %s: a flow family needs a flow (or file) template", base);
    if (cycles && !f->alternate)
        for (int i = 0; i < k; i++)
            CX_REQUIRE(f->senses[i] >= -1 && f->senses[i] <= 1, CX_ERR_INVALID,
                       "family %s: sense %d of copy %d must be +1 or -1", base, f->senses[i],
                       i + 1);

    const double pi = acos(-1.0);
    const int npairs = (k + 1) / 2;
    for (int i = 0; i < k; i++) {
        cx_task_spec *t = &tasks[i];
        *t = f->base;
        CX_TRY(name_copy(t, base, i + 1));
        switch (f->kind) {
        case CX_FAMILY_CYCLES_LINE:
            t->centre[0] = ((double)i - 0.5 * (double)(k - 1)) * f->spacing;
            break;
        case CX_FAMILY_CYCLES_RING: {
            const double a = 2.0 * pi * (double)i / (double)k;
            t->centre[0] = f->spacing * cos(a);
            t->centre[1] = f->spacing * sin(a);
            break;
        }
        case CX_FAMILY_FLOW_SHIFTED:
            t->shift[0] = ((double)i - 0.5 * (double)(k - 1)) * f->spacing;
            break;
        default: { /* CX_FAMILY_FLOW_MIRRORED */
            const int j = i / 2;
            t->mirror = (i % 2 == 1) ? !f->base.mirror : f->base.mirror;
            t->shift[0] = ((double)j - 0.5 * (double)(npairs - 1)) * f->spacing;
            break;
        }
        }
        if (cycles) {
            int sense =
                f->alternate ? (i % 2 == 0 ? 1 : -1) : (f->senses[i] == 0 ? 1 : f->senses[i]);
            t->speed = (double)sense * fabs(f->base.speed);
        }
    }
done:
    return rc;
}
