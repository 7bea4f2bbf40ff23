/* coexist engine: checksums for journal records and the study hash.
 *
 * CRC-32C: the cyclic redundancy check with the Castagnoli polynomial 0x1EDC6F41 (reflected
 * 0x82F63B78), chosen for its Hamming distance at record lengths of a few kilobytes
 * (Castagnoli, Braeuer & Herrmann 1993, "Optimization of cyclic redundancy-check codes with 24
 * and 32 parity bits", IEEE Trans. Commun. 41(6), 883-892). Computed bytewise from a 256-entry
 * table (Sarwate 1988, "Computation of cyclic redundancy checks via table look-up", Commun. ACM
 * 31(8), 1008-1013), with the usual initial value and final complement of all ones, so that
 * the check value of "123456789" is 0xE3069283.
 *
 * The study hash is 64-bit FNV-1a (Fowler, Noll & Vo; offset basis 14695981039346656037,
 * prime 1099511628211; described in Eastlake, Hansen, Fowler, Vo & Noll, IETF draft
 * "The FNV Non-Cryptographic Hash Algorithm"). It only names a study; it is not a defence.
 */
#include <stddef.h>
#include <stdint.h>

#include "coexist/engine.h"

static uint32_t crc_table[256];
static int crc_ready;

/* The table is filled on first use; concurrent first calls write identical values. */
static void crc_init(void)
{
    for (uint32_t i = 0; i < 256; i++) {
        uint32_t c = i;
        for (int k = 0; k < 8; k++)
            c = (c & 1u) ? (c >> 1) ^ 0x82F63B78u : c >> 1;
        crc_table[i] = c;
    }
    crc_ready = 1;
}

uint32_t cx_crc32c(uint32_t crc, const void *data, size_t n)
{
    const unsigned char *p = data;
    if (!crc_ready)
        crc_init();
    crc = ~crc;
    for (size_t i = 0; i < n; i++)
        crc = crc_table[(crc ^ p[i]) & 0xFFu] ^ (crc >> 8);
    return ~crc;
}

uint64_t cx_hash64(const void *data, size_t n)
{
    const unsigned char *p = data;
    uint64_t h = 14695981039346656037ull;
    for (size_t i = 0; i < n; i++) {
        h ^= p[i];
        h *= 1099511628211ull;
    }
    return h;
}
