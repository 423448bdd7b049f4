/* Linker: Kalman worked value, crossings, gap closing, births and ends, determinism, bad input,
 * and link accuracy on a random field of moving bubbles (invented data). */
#include "check.h"
#include "track/linker.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static unsigned long long rng_state = 0x9E3779B97F4A7C15ULL;
static double urand(void)
{
    rng_state ^= rng_state >> 12;
    rng_state ^= rng_state << 25;
    rng_state ^= rng_state >> 27;
    return (double)((rng_state * 2685821657736338717ULL) >> 11) / 9007199254740992.0;
}
static double nrand(void)
{
    double u = urand() + 1e-300, v = urand();
    return sqrt(-2 * log(u)) * cos(2 * M_PI * v);
}

static sp_link_det det(double x, double y, double d)
{
    sp_link_det q = {x, y, d, 0.8, 0, M_PI * d * d / 4, 0};
    return q;
}

/* Drain the ended queue; returns the number popped and stores up to cap tracks' ids and lengths. */
static int drain(sp_linker *lk, int64_t *id, int *n, int *missed, int cap)
{
    sp_track *t;
    int k = 0;
    while (sp_linker_pop_ended(lk, &t)) {
        if (k < cap) {
            id[k] = t->id;
            n[k] = t->n;
            missed[k] = t->missed;
        }
        k++;
        sp_track_free(t);
    }
    return k;
}

static void test_kalman(void)
{
    /* REFERENCES.md (Kalman 1960): x = [0, 1], P = I, dt 1, Q 0, R 1, z 1.2. */
    sp_kalman_cv k = {0, 0, 1, 0, 1, 0, 1};
    sp_kalman_cv_predict(&k, 1, 0);
    sp_kalman_cv_update(&k, 1.2, 0, 1);
    CHECK_NEAR(k.x, 1.133333333, 1e-8, "x position");
    CHECK_NEAR(k.vx, 1.066666667, 1e-8, "x velocity");
    CHECK_NEAR(k.p00, 0.666666667, 1e-8, "P00");
    CHECK_NEAR(k.p01, 0.333333333, 1e-8, "P01");
    CHECK_NEAR(k.p11, 0.666666667, 1e-8, "P11");
    /* Process noise: white acceleration over dt 2 adds q·[[4, 4], [4, 4]]. */
    sp_kalman_cv z = {0, 0, 0, 0, 0, 0, 0};
    sp_kalman_cv_predict(&z, 2, 0.25);
    CHECK_NEAR(z.p00, 1, 1e-15, "Q00");
    CHECK_NEAR(z.p01, 1, 1e-15, "Q01");
    CHECK_NEAR(z.p11, 1, 1e-15, "Q11");
}

static void test_crossing(void)
{
    /* Two bubbles on paths 2 px apart pass each other at frame 10 at 4 px/frame: a nearest-
     * neighbour rule swaps them; the predicted positions keep them apart. */
    sp_linker *lk;
    sp_error err;
    CHECK(sp_linker_new(&lk, NULL, &err) == 0, "%s", err.msg);
    int64_t ida = 0, idb = 0;
    int consistent = 1;
    for (int f = 0; f <= 20; f++) {
        sp_link_det d[2] = {det(10 + 4 * f, 100, 6), det(90 - 4 * f, 102, 6)};
        if (f == 10) { /* listed in the other order on the crossing frame */
            sp_link_det tmp = d[0];
            d[0] = d[1];
            d[1] = tmp;
        }
        int64_t ids[2];
        CHECK(sp_linker_push(lk, f, f / 100.0, d, 2, ids, &err) == 0, "%s", err.msg);
        int64_t a = f == 10 ? ids[1] : ids[0], b = f == 10 ? ids[0] : ids[1];
        if (f == 0) {
            ida = a;
            idb = b;
        }
        consistent &= a == ida && b == idb;
    }
    CHECK(ida == 1 && idb == 2, "ids in detection order at birth: %lld %lld", (long long)ida, (long long)idb);
    CHECK(consistent, "identities swapped at the crossing");
    sp_linker_finish(lk);
    int64_t id[4];
    int n[4], m[4];
    CHECK(drain(lk, id, n, m, 4) == 2 && n[0] == 21 && n[1] == 21 && id[0] == 1, "two tracks of 21");
    sp_linker_free(lk);
}

static void test_gaps(void)
{
    /* A bubble rising 3 px/frame, missing frames 5-7 (3 = max_gap: closed), then 12-15 (4: new
     * track); a second, still bubble appears at frame 9 mid-field and leaves after frame 18. */
    sp_linker *lk;
    sp_error err;
    CHECK(sp_linker_new(&lk, NULL, &err) == 0, "%s", err.msg);
    int64_t seen[40];
    int endframe[8];
    int64_t endid[8];
    int nend = 0;
    for (int f = 0; f < 30; f++) {
        sp_link_det d[2];
        int n = 0;
        int miss = (f >= 5 && f <= 7) || (f >= 12 && f <= 15);
        if (!miss)
            d[n++] = det(50, 500 - 3 * f, 8);
        if (f >= 9 && f <= 18)
            d[n++] = det(200, 200, 10);
        int64_t ids[2] = {0, 0};
        CHECK(sp_linker_push(lk, f, f * 0.01, d, n, ids, &err) == 0, "%s", err.msg);
        seen[f] = miss ? 0 : ids[0];
        if (f >= 9 && f <= 18)
            CHECK(ids[n - 1] == 2, "still bubble id %lld at frame %d", (long long)ids[n - 1], f);
        sp_track *t;
        while (sp_linker_pop_ended(lk, &t)) {
            if (nend < 8) {
                endframe[nend] = f;
                endid[nend++] = t->id;
                if (t->id == 1)
                    CHECK(t->n == 9 && t->missed == 3 && t->pts[8].frame == 11, "track 1: n %d missed %d",
                          t->n, t->missed);
            }
            sp_track_free(t);
        }
    }
    CHECK(seen[4] == 1 && seen[8] == 1 && seen[11] == 1, "gap of 3 closed");
    CHECK(seen[16] == 3 && seen[29] == 3, "gap of 4 starts a new track: %lld", (long long)seen[16]);
    /* Track 1 last seen at 11 ends when frame 15 is its 4th miss; track 2 last seen at 18 ends at 22. */
    CHECK(nend == 2 && endid[0] == 1 && endframe[0] == 15 && endid[1] == 2 && endframe[1] == 22,
          "ends: %d (%lld at %d)", nend, (long long)endid[0], endframe[0]);
    CHECK(sp_linker_active(lk) == 1, "one active");
    sp_linker_finish(lk);
    CHECK(sp_linker_active(lk) == 0, "none active after finish");
    sp_linker_free(lk);
}

/* A field of nb bubbles at constant velocity plus jitter; bubbles leave at the top and are
 * replaced at the bottom. Returns the fraction of links that join the same true bubble. */
static double field_run(int nb, int frames, int64_t *fingerprint, int *maxactive)
{
    sp_linker *lk;
    sp_error err;
    if (sp_linker_new(&lk, NULL, &err))
        return -1;
    double W = 1000, H = 1000;
    typedef struct {
        double x, y, vx, vy, d;
        int truth;
    } bub;
    bub *b = malloc(sizeof *b * (size_t)nb);
    sp_link_det *d = malloc(sizeof *d * (size_t)nb);
    int *truth = malloc(sizeof *truth * (size_t)nb);
    int64_t *ids = malloc(sizeof *ids * (size_t)nb);
    int64_t *truth_of_id = calloc(1000000, sizeof *truth_of_id);
    int next_truth = 1;
    for (int i = 0; i < nb; i++)
        b[i] = (bub){urand() * W, urand() * H, 2 * nrand(), -5 - 3 * urand(), 4 + 8 * urand(), next_truth++};
    long good = 0, links = 0;
    int64_t fp = 0;
    *maxactive = 0;
    for (int f = 0; f < frames; f++) {
        int n = 0;
        for (int i = 0; i < nb; i++) {
            bub *q = &b[i];
            q->x += q->vx + 0.2 * nrand();
            q->y += q->vy + 0.2 * nrand();
            q->vx += 0.1 * nrand();
            if (q->y < 0) { /* leaves at the top, a new bubble enters at the bottom */
                *q = (bub){urand() * W, H, 2 * nrand(), -5 - 3 * urand(), 4 + 8 * urand(), next_truth++};
            }
            if (urand() < 0.02) /* occasional missed detection */
                continue;
            d[n] = det(q->x, q->y, q->d * (1 + 0.03 * nrand()));
            truth[n++] = q->truth;
        }
        if (sp_linker_push(lk, f, f / 500.0, d, n, ids, &err)) {
            fprintf(stderr, "%s\n", err.msg);
            break;
        }
        for (int j = 0; j < n; j++) {
            fp = (int64_t)((uint64_t)fp * 1000003u + (uint64_t)ids[j]);
            if (ids[j] < 1000000) {
                if (truth_of_id[ids[j]]) {
                    links++;
                    good += truth_of_id[ids[j]] == truth[j];
                }
                truth_of_id[ids[j]] = truth[j];
            }
        }
        if (sp_linker_active(lk) > *maxactive)
            *maxactive = sp_linker_active(lk);
        sp_track *t;
        while (sp_linker_pop_ended(lk, &t))
            sp_track_free(t);
    }
    sp_linker_finish(lk);
    sp_track *t;
    while (sp_linker_pop_ended(lk, &t))
        sp_track_free(t);
    sp_linker_free(lk);
    free(b);
    free(d);
    free(truth);
    free(ids);
    free(truth_of_id);
    *fingerprint = fp;
    return links ? (double)good / links : 0;
}

static void test_field(void)
{
    int64_t fp1, fp2;
    int ma1, ma2;
    unsigned long long s0 = rng_state;
    double acc = field_run(800, 300, &fp1, &ma1);
    rng_state = s0;
    double acc2 = field_run(800, 300, &fp2, &ma2);
    printf("random field, 800 bubbles, 300 frames: %.5f of links correct, at most %d active\n", acc, ma1);
    CHECK(acc > 0.995, "link accuracy %.5f", acc);
    CHECK(fp1 == fp2 && acc == acc2, "same input, different ids");
    /* Only active tracks are held: bubbles present plus those coasting out their gap. */
    CHECK(ma1 <= 800 * 1.1, "%d tracks held for 800 bubbles", ma1);
}

static void test_bad_input(void)
{
    sp_linker *lk;
    sp_error err;
    sp_linker_opts o;
    sp_linker_opts_default(&o);
    o.max_gap = -1;
    CHECK(sp_linker_new(&lk, &o, &err) == SP_ERR_INPUT && lk == NULL, "negative gap accepted");
    sp_linker_opts_default(&o);
    o.meas_sigma_px = NAN;
    CHECK(sp_linker_new(&lk, &o, &err) == SP_ERR_INPUT, "NaN option accepted");
    sp_linker_opts_default(&o);
    CHECK(sp_linker_new(&lk, &o, &err) == 0, "%s", err.msg);
    sp_link_det d[1] = {det(1, 2, 3)};
    int64_t ids[1];
    CHECK(sp_linker_push(lk, 5, 0.05, d, 1, ids, &err) == 0, "%s", err.msg);
    CHECK(sp_linker_push(lk, 5, 0.05, d, 1, ids, &err) == SP_ERR_INPUT && strstr(err.msg, "frame 5"),
          "repeated frame: %s", err.msg);
    CHECK(sp_linker_push(lk, 3, 0.03, d, 1, ids, &err) == SP_ERR_INPUT, "frame going back");
    d[0].x = NAN;
    CHECK(sp_linker_push(lk, 6, 0.06, d, 1, ids, &err) == SP_ERR_INPUT && strstr(err.msg, "detection 0"),
          "NaN detection: %s", err.msg);
    d[0] = det(1, 2, -1);
    CHECK(sp_linker_push(lk, 6, 0.06, d, 1, ids, &err) == SP_ERR_INPUT, "negative diameter");
    CHECK(sp_linker_push(lk, 6, 0.06, NULL, 1, ids, &err) == SP_ERR_INPUT, "NULL detections");
    CHECK(sp_linker_push(lk, 6, 0.06, NULL, -1, ids, &err) == SP_ERR_INPUT, "negative count");
    d[0] = det(1, 2, 3);
    CHECK(sp_linker_push(lk, 6, 0.06, d, 1, ids, &err) == 0 && ids[0] == 1, "usable after rejected pushes");
    sp_linker_free(lk);

    /* With fps_hint the step comes from time, which must advance. */
    o.fps_hint = 100;
    CHECK(sp_linker_new(&lk, &o, &err) == 0, "%s", err.msg);
    CHECK(sp_linker_push(lk, 0, 1.0, d, 1, ids, &err) == 0, "%s", err.msg);
    CHECK(sp_linker_push(lk, 1, 1.0, d, 1, ids, &err) == SP_ERR_INPUT, "time not advancing");
    sp_linker_free(lk);
}

static void test_max_points(void)
{
    sp_linker *lk;
    sp_error err;
    sp_linker_opts o;
    sp_linker_opts_default(&o);
    o.max_points = 10;
    CHECK(sp_linker_new(&lk, &o, &err) == 0, "%s", err.msg);
    int64_t ids[1], last = 0;
    for (int f = 0; f < 25; f++) {
        sp_link_det d[1] = {det(100, 100, 5)};
        CHECK(sp_linker_push(lk, f, f, d, 1, ids, &err) == 0, "%s", err.msg);
        last = ids[0];
    }
    sp_linker_finish(lk);
    int64_t id[4];
    int n[4], m[4];
    int k = drain(lk, id, n, m, 4);
    CHECK(k == 3 && n[0] == 10 && n[1] == 10 && n[2] == 5 && last == 3, "split at 10: %d tracks", k);
    sp_linker_free(lk);
}

/* A small bubble passes behind a large one (invented geometry): while their outlines overlap the
 * detector gives one merged outline, flagged, at the area-weighted centroid. When they part, each
 * keeps its id; the small one's track is not ended while hidden. */
static void test_occlusion(void)
{
    sp_linker *lk = NULL;
    sp_error err;
    CHECK(sp_linker_new(&lk, NULL, &err) == 0, "new");
    const double db = 60, ds = 25, ab = M_PI * db * db / 4, as = M_PI * ds * ds / 4;
    int64_t big0 = 0, small0 = 0, big1 = 0, small1 = 0;
    int merged = 0, ok = 1;
    for (int f = 0; f < 45 && ok; f++) {
        double bx = 200, by = 600 - 10.0 * f, sx = 140 + 3.0 * f, sy = 600 - 10.0 * f;
        sp_link_det d[2];
        int64_t ids[2];
        int n;
        if (fabs(sx - bx) < 35) {
            double a = ab + as;
            d[0] = (sp_link_det){
                (ab * bx + as * sx) / a, (ab * by + as * sy) / a, sqrt(4 * a / M_PI), 0.7, 0, a, 1};
            n = 1;
            merged++;
        } else {
            d[0] = det(bx, by, db);
            d[1] = det(sx, sy, ds);
            n = 2;
        }
        ok = sp_linker_push(lk, f, f / 500.0, d, n, ids, &err) == 0;
        if (f == 5) {
            big0 = ids[0];
            small0 = ids[1];
        }
        if (f == 44) {
            big1 = ids[0];
            small1 = ids[1];
        }
    }
    CHECK(ok && merged >= 20, "pushed, %d merged frames", merged);
    CHECK(big0 != small0 && big1 == big0, "large bubble keeps its id (%lld -> %lld)", (long long)big0,
          (long long)big1);
    CHECK(small1 == small0, "small bubble re-acquired after the overlap (%lld -> %lld)", (long long)small0,
          (long long)small1);
    sp_linker_free(lk);
}

/* A merge's holder keeps it (invented geometry, after a case seen on the dense column): a large
 * bubble A and a small one B merge into one flagged outline that A's track holds while B's track is
 * hidden in it. Then a stranger C, whole, appears 68 px from A. Pricing B's miss at cost_max made the
 * assignment move A's track onto C so B's track could take the merge; B's track must stay hidden. */
static void test_merge_holder(void)
{
    sp_linker *lk = NULL;
    sp_error err;
    CHECK(sp_linker_new(&lk, NULL, &err) == 0, "new");
    const double da = 90, db = 36, dc = 47, aa = M_PI * da * da / 4, ab = M_PI * db * db / 4;
    int64_t ida = 0, idb = 0, idc = 0;
    int ok = 1, kept = 1, merged = 0;
    for (int f = 0; f < 21 && ok; f++) {
        double ax = 300, y = 700 - 10.0 * f, bx = ax + fmax(80 - 8.0 * f, 20);
        sp_link_det d[3];
        int64_t ids[3];
        int n = 0;
        if (bx - ax < 55) {
            double a = aa + ab;
            d[n++] = (sp_link_det){(aa * ax + ab * bx) / a, y, sqrt(4 * a / M_PI), 0.7, 0, a, 1};
            merged++;
        } else {
            d[n++] = det(ax, y, da);
            d[n++] = det(bx, y, db);
        }
        if (f >= 12)
            d[n++] = det(ax + 68, y + 10, dc);
        ok = sp_linker_push(lk, f, f / 500.0, d, n, ids, &err) == 0;
        if (f == 2) {
            ida = ids[0];
            idb = ids[1];
        }
        if (f >= 12) {
            kept &= ids[0] == ida;
            if (f == 12)
                idc = ids[n - 1];
            kept &= ids[n - 1] == idc;
        }
    }
    CHECK(ok && merged >= 15, "pushed, %d merged frames", merged);
    CHECK(kept && idc != ida && idc != idb,
          "the merge stays with A's track (%lld), the stranger gets its own (%lld)", (long long)ida,
          (long long)idc);
    CHECK(sp_linker_active(lk) == 3, "B's track is still held, hidden (%d active)", sp_linker_active(lk));
    sp_linker_free(lk);
}

/* A bubble entering through the border at 11 px/frame (as on the dense column): the part in view grows
 * from a sliver and its centroid runs along the border. One track, not one per frame. */
static void test_edge_entry(void)
{
    sp_linker *lk = NULL;
    sp_error err;
    CHECK(sp_linker_new(&lk, NULL, &err) == 0, "new");
    int64_t first = 0;
    int ok = 1, same = 1;
    for (int f = 0; f < 6 && ok; f++) {
        double w = 2.0 + 4.0 * f; /* width in view */
        sp_link_det q = {639.5 - w / 2, 677 - 11.0 * f, sqrt(4 * w * 20 / M_PI), 0.2, 90, w * 20, 1};
        int64_t id;
        ok = sp_linker_push(lk, f, f / 500.0, &q, 1, &id, &err) == 0;
        if (f == 0)
            first = id;
        same &= id == first;
    }
    CHECK(ok && same, "entering bubble keeps one track");
    sp_linker_free(lk);
}

int main(void)
{
    test_occlusion();
    test_merge_holder();
    test_edge_entry();
    test_kalman();
    test_crossing();
    test_gaps();
    test_bad_input();
    test_max_points();
    test_field();
    return check_report();
}
