/* A minimal prover-side emitter in C: proves the sum of a 3-variable multilinear table
 * over BabyBear (p = 2^31 - 2^27 + 1) and writes the event stream that `stepper record`
 * and `stepper import` read (transcripts/EVENTS.md), one JSON object per line.
 *
 * Brackwater Ferries: the table holds the cars parked in the eight deck slots of one
 * sailing; the claim is the total. Challenges here are fixed numbers standing in for a
 * real prover's Fiat-Shamir challenges (no schedule is declared, so `check` says it did
 * not re-derive them).
 *
 * Build and record:  cc -std=c99 -O2 -o emit_deck_slots emit_deck_slots.c
 *                    stepper record -o deck.sumtr -- ./emit_deck_slots
 * Without STEPPER_EVENTS set it writes the lines to standard output instead.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#define P 2013265921ULL /* 2^31 - 2^27 + 1 */
#define NUM_VARS 3

static uint64_t add(uint64_t a, uint64_t b) { return (a + b) % P; }
static uint64_t sub(uint64_t a, uint64_t b) { return (a + P - b) % P; }
static uint64_t mul(uint64_t a, uint64_t b) { return (a * b) % P; } /* both < 2^31: no overflow */

int main(void) {
    const char *path = getenv("STEPPER_EVENTS");
    FILE *out = path ? fopen(path, "a") : stdout;
    if (!out) { perror("STEPPER_EVENTS"); return 1; }
    /* one line per event, flushed as it is written, so a crash keeps every complete line */
    setvbuf(out, NULL, _IOLBF, 0);

    uint64_t table[1 << NUM_VARS] = {3, 1, 4, 1, 5, 9, 2, 6};
    const uint64_t challenges[NUM_VARS] = {17, 1234567, 99991};
    size_t n = 1 << NUM_VARS;
    uint64_t claim = 0;
    for (size_t i = 0; i < n; i++) claim = add(claim, table[i]);

    fprintf(out, "{\"type\":\"field\",\"name\":\"babybear\"}\n");
    fprintf(out, "{\"type\":\"instance\",\"name\":\"deck-slots\",\"num_vars\":%d,\"degree\":1,"
                 "\"claim\":\"%llu\"}\n", NUM_VARS, (unsigned long long)claim);
    for (int k = 0; k < NUM_VARS; k++) {
        /* round k binds the lowest remaining index bit: g(0) sums the even entries, g(1) the odd */
        uint64_t g0 = 0, g1 = 0;
        for (size_t i = 0; i < n; i += 2) { g0 = add(g0, table[i]); g1 = add(g1, table[i + 1]); }
        fprintf(out, "{\"type\":\"round\",\"evals\":[\"%llu\",\"%llu\"]}\n",
                (unsigned long long)g0, (unsigned long long)g1);
        uint64_t r = challenges[k];
        fprintf(out, "{\"type\":\"challenge\",\"value\":\"%llu\"}\n", (unsigned long long)r);
        for (size_t i = 0; i < n / 2; i++)  /* fold: t'(x) = t(0,x) + r * (t(1,x) - t(0,x)) */
            table[i] = add(table[2 * i], mul(r, sub(table[2 * i + 1], table[2 * i])));
        n /= 2;
    }
    fprintf(out, "{\"type\":\"final\",\"value\":\"%llu\"}\n", (unsigned long long)table[0]);
    if (out != stdout) fclose(out);
    return 0;
}
