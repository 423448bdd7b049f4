/* measure with interrupts at chosen frames (the stop flag raised from the progress callback) and
 * --resume: the finished outputs must be byte-identical to an uninterrupted run's, also when the
 * run is stopped after every batch, stopped after its last frame, uses a selection (start, step,
 * count), or does no tracking. Invented input: PGM frames of dark discs rising over a lit field. */
#include "check.h"
#include "spume.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#define W 96
#define H 96
#define NF 60

static void write_frames(const char *dir)
{
    static uint8_t px[W * H];
    for (int f = 0; f < NF; f++) {
        for (int y = 0; y < H; y++)
            for (int x = 0; x < W; x++)
                px[y * W + x] = (uint8_t)(190 + (x + y) / 16);
        /* Three discs rising at different speeds, one entering late. */
        const double cx[3] = {22, 50, 76}, r[3] = {6, 8, 5}, v[3] = {1.5, 2.0, 2.5}, y0[3] = {90, 100, 130};
        for (int k = 0; k < 3; k++) {
            double cy = y0[k] - v[k] * f;
            for (int y = 0; y < H; y++)
                for (int x = 0; x < W; x++)
                    if ((x - cx[k]) * (x - cx[k]) + (y - cy) * (y - cy) <= r[k] * r[k])
                        px[y * W + x] = 45;
        }
        char path[512];
        snprintf(path, sizeof path, "%s/f%04d.pgm", dir, f);
        FILE *fp = fopen(path, "wb");
        if (!fp)
            exit(2);
        fprintf(fp, "P5\n%d %d\n255\n", W, H);
        fwrite(px, 1, sizeof px, fp);
        fclose(fp);
    }
}

typedef struct stopper {
    volatile int flag;
    int64_t after; /* raise the flag once this many frames are done */
} stopper;

static void on_progress(void *ud, const sp_progress *p)
{
    stopper *st = ud;
    if (!strcmp(p->phase, "detect") && st->after >= 0 && p->done >= st->after)
        st->flag = 1;
}

static void settings(sp_measure_settings *s, stopper *st, int track, int64_t start, int64_t step,
                     int64_t count)
{
    sp_measure_settings_default(s);
    s->source.fps = 100;
    s->source.start = start;
    s->source.step = step;
    s->source.count = count;
    s->mm_per_px = 0.1;
    s->report = 0;
    s->boot = 50;
    s->threads = 1; /* batches of 4 frames */
    s->track = track;
    s->stop = &st->flag;
    s->progress = on_progress;
    s->progress_ud = st;
}

static char *slurp(const char *dir, const char *name, size_t *n)
{
    char path[512];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    FILE *f = fopen(path, "rb");
    if (!f)
        return NULL;
    fseek(f, 0, SEEK_END);
    long len = ftell(f);
    fseek(f, 0, SEEK_SET);
    char *p = malloc((size_t)len + 1);
    *n = fread(p, 1, (size_t)len, f);
    fclose(f);
    return p;
}

static int same_file(const char *a, const char *b, const char *name)
{
    size_t na = 0, nb = 0;
    char *pa = slurp(a, name, &na), *pb = slurp(b, name, &nb);
    int same = pa && pb && na == nb && memcmp(pa, pb, na) == 0;
    if (!pa && !pb)
        same = 1; /* absent in both (no tracking) */
    free(pa);
    free(pb);
    return same;
}

static int exists(const char *dir, const char *name)
{
    char path[512];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    return access(path, F_OK) == 0;
}

/* Run fresh with stops after `first` frames, then resume with a stop every `every` frames until
 * complete; compare with the clean run. Returns the number of interrupts. */
static int interrupted(const char *input, const char *clean, const char *out, const char *tag, int track,
                       int64_t start, int64_t step, int64_t count, int64_t first, int64_t every)
{
    sp_measure_settings s;
    stopper st = {0, first};
    sp_measure_report rep;
    sp_error err;
    int stops = 0;
    settings(&s, &st, track, start, step, count);
    int rc = sp_measure(input, out, &s, &rep, &err);
    CHECK(rc == 0 && !rep.complete, "%s: first run stopped (rc %d: %s)", tag, rc, rc ? err.msg : "");
    if (rc)
        return 0;
    stops++;
    CHECK(exists(out, "resume.checkpoint"), "%s: checkpoint written", tag);
    while (!rep.complete && stops < 100) {
        int64_t done = rep.frames;
        st.flag = 0;
        st.after = every > 0 ? done + every : -1;
        s.resume = 1;
        rc = sp_measure(input, out, &s, &rep, &err);
        CHECK(rc == 0, "%s: resume after %lld frames (%s)", tag, (long long)done, rc ? err.msg : "");
        if (rc)
            return stops;
        CHECK(rep.frames >= done, "%s: frames only grow (%lld after %lld)", tag, (long long)rep.frames,
              (long long)done);
        if (!rep.complete)
            stops++;
    }
    const char *names[] = {"bubbles.csv", "frames.csv", "tracks.csv", "sites.csv", "summary.json"};
    for (int i = 0; i < 5; i++)
        CHECK(same_file(out, clean, names[i]), "%s: %s identical to the uninterrupted run", tag, names[i]);
    CHECK(!exists(out, "resume.checkpoint") && !exists(out, "resume.links"), "%s: checkpoint removed", tag);
    return stops;
}

static void clean_run(const char *input, const char *out, int track, int64_t start, int64_t step,
                      int64_t count)
{
    sp_measure_settings s;
    stopper st = {0, -1};
    sp_measure_report rep;
    sp_error err;
    settings(&s, &st, track, start, step, count);
    int rc = sp_measure(input, out, &s, &rep, &err);
    CHECK(rc == 0 && rep.complete, "clean run %s (%s)", out, rc ? err.msg : "");
}

int main(void)
{
    char root[] = "/tmp/spume-unit-resume-XXXXXX";
    if (!mkdtemp(root))
        return 2;
    char frames[256], clean[256], out[256], path[256];
    snprintf(frames, sizeof frames, "%s/frames", root);
    mkdir(frames, 0777);
    write_frames(frames);

    /* Whole run; stopped after every batch of 4 frames. */
    snprintf(clean, sizeof clean, "%s/clean", root);
    clean_run(frames, clean, 1, 0, 1, 0);
    snprintf(out, sizeof out, "%s/every", root);
    int n = interrupted(frames, clean, out, "every batch", 1, 0, 1, 0, 4, 4);
    CHECK(n >= 10, "stopped %d times", n);

    /* Stopped after the last frame: nothing left to decode on resume. */
    snprintf(out, sizeof out, "%s/last", root);
    interrupted(frames, clean, out, "after the last frame", 1, 0, 1, 0, NF, -1);

    /* A selection: start 3, every 2nd frame, 20 frames; stops after frame 8 and after the last. */
    snprintf(clean, sizeof clean, "%s/clean-sel", root);
    clean_run(frames, clean, 1, 3, 2, 20);
    snprintf(out, sizeof out, "%s/sel", root);
    interrupted(frames, clean, out, "selection", 1, 3, 2, 20, 8, 4);
    snprintf(out, sizeof out, "%s/sel-last", root);
    interrupted(frames, clean, out, "selection, after its last frame", 1, 3, 2, 20, 20, -1);

    /* No tracking: no spill, the totals and tables alone. */
    snprintf(clean, sizeof clean, "%s/clean-notrack", root);
    clean_run(frames, clean, 0, 0, 1, 0);
    snprintf(out, sizeof out, "%s/notrack", root);
    interrupted(frames, clean, out, "no tracking", 0, 0, 1, 0, 12, 16);

    /* The checkpoint and the spill are untrusted: 300 damaged versions (one byte changed, or cut
     * short, at pseudo-random places) are each refused with an input error naming the file, the
     * tables are left alone, and the intact files still resume to the clean result. */
    {
        snprintf(clean, sizeof clean, "%s/clean", root);
        snprintf(out, sizeof out, "%s/mutate", root);
        sp_measure_settings ms;
        stopper mst = {0, 12};
        sp_measure_report mrep;
        sp_error merr;
        settings(&ms, &mst, 1, 0, 1, 0);
        int mrc = sp_measure(frames, out, &ms, &mrep, &merr);
        CHECK(mrc == 0 && !mrep.complete, "mutation base run stopped (%s)", mrc ? merr.msg : "");
        size_t nck = 0, nln = 0, nbub = 0, nb2 = 0;
        char *ck = slurp(out, "resume.checkpoint", &nck), *ln = slurp(out, "resume.links", &nln);
        char *bub = slurp(out, "bubbles.csv", &nbub);
        uint64_t x = 0x9e3779b97f4a7c15ULL;
        int refused = 0, named = 0, untouched = 0;
        for (int it = 0; ck && ln && bub && it < 300; it++) {
            x ^= x << 13, x ^= x >> 7, x ^= x << 17; /* xorshift64 (Marsaglia 2003) */
            int which = (int)(x % 3) == 0;           /* 1: the spill, else the checkpoint */
            const char *name = which ? "resume.links" : "resume.checkpoint";
            char *data = which ? ln : ck;
            size_t n = which ? nln : nck, at = (size_t)((x >> 8) % n), len = n;
            char fpath[512];
            snprintf(fpath, sizeof fpath, "%s/%s", out, name);
            FILE *f = fopen(fpath, "wb");
            if (!f)
                break;
            if ((x >> 60) & 1) {
                len = at; /* cut short */
                fwrite(data, 1, len, f);
            } else {
                data[at] ^= (char)(1 + ((x >> 40) & 0x7f)); /* one byte changed */
                fwrite(data, 1, n, f);
                data[at] ^= (char)(1 + ((x >> 40) & 0x7f));
            }
            fclose(f);
            ms.resume = 1;
            mst.flag = 0;
            mst.after = -1;
            mrc = sp_measure(frames, out, &ms, &mrep, &merr);
            refused += mrc == SP_ERR_INPUT;
            named += mrc == SP_ERR_INPUT && strstr(merr.msg, name) != NULL;
            char *now = slurp(out, "bubbles.csv", &nb2);
            untouched += now && nb2 == nbub && memcmp(now, bub, nbub) == 0;
            free(now);
            f = fopen(fpath, "wb"); /* restore */
            if (f) {
                fwrite(data, 1, n, f);
                fclose(f);
            }
            if (mrc == 0)
                break; /* accepted damage: the check below reports it */
        }
        CHECK(refused == 300 && named == 300 && untouched == 300,
              "damaged checkpoints: %d of 300 refused, %d naming the file, %d leaving bubbles.csv alone",
              refused, named, untouched);
        mst.flag = 0;
        mst.after = -1;
        ms.resume = 1;
        mrc = sp_measure(frames, out, &ms, &mrep, &merr);
        CHECK(mrc == 0 && mrep.complete, "intact checkpoint resumes after the damaged ones (%s)",
              mrc ? merr.msg : "");
        CHECK(same_file(out, clean, "tracks.csv") && same_file(out, clean, "bubbles.csv"),
              "and gives the clean result");
        free(ck);
        free(ln);
        free(bub);
    }

    /* Resume of a finished run: refused, nothing removed. */
    sp_measure_settings s;
    stopper st = {0, -1};
    sp_measure_report rep;
    sp_error err;
    settings(&s, &st, 1, 0, 1, 0);
    s.resume = 1;
    snprintf(clean, sizeof clean, "%s/clean", root);
    int rc = sp_measure(frames, clean, &s, &rep, &err);
    CHECK(rc == SP_ERR_INPUT && strstr(err.msg, "complete already") && exists(clean, "bubbles.csv"),
          "resume of a complete run refused (%s)", err.msg);

    if (getenv("KEEP"))
        return check_report();
    snprintf(path, sizeof path, "rm -rf '%s'", root);
    if (system(path) != 0)
        fprintf(stderr, "could not remove %s\n", root);
    return check_report();
}
