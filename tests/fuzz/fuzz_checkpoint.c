/* libFuzzer target: the `measure --resume` readers (src/pipeline/resume.c), DIR/resume.checkpoint and
 * DIR/resume.links, driven through sp_measure exactly as the command drives them.
 *
 * Once per process a real interrupted run is made in a temporary directory: 10 invented PGM frames
 * (dark discs rising over a lit field, 48x48), measured with tracking and stopped through the
 * progress callback after the first batch of 4 frames, which leaves the checkpoint, the spill and
 * the tables. Their pristine bytes are kept. Per input, the directory is restored, then one of the
 * two resume files is replaced by the input past its first byte, and the run is resumed.
 *
 * First input byte: bit 0 picks the file (0 the checkpoint, 1 the spill); bit 1 asks the harness to
 * make the checksums agree so that the fuzzer gets past them to the fields behind:
 *   - checkpoint: its last 8 bytes are the FNV-1a 64 (offset basis 0xcbf29ce484222325, prime
 *     0x100000001b3) of every byte before them, in native byte order, and nothing follows
 *     (load_checkpoint in resume.c); the harness rewrites those 8 bytes;
 *   - spill: the checkpoint records the spill's valid length and its FNV-1a 64 (over the records in
 *     order, i.e. over those bytes) right after the two text blocks (v[2] and the hash that follows
 *     v[0..5]); the harness writes the input's length and hash there, then redoes the checkpoint's
 *     own checksum as above.
 *
 * Checked: a refusal keeps the error contract (status 1 or 2, one line, no control characters) and
 * names the file replaced (with fixed checksums the checkpoint's records of the spill and the tables
 * may put the blame on those, so any of the four files then), and leaves the directory exactly as it was
 * (every file's bytes, no file added); an acceptance completes the run (tables written, both resume files
 * removed), and the pristine files themselves must be accepted. The same code runs in the ordinary suite
 * through tests/tools/pipeline_fuzz_replay.c; with SPUME_FUZZ_DUMP_SEEDS=DIR set, the first call writes the
 * four seeds (each selector with its pristine file) into DIR. */
#include "fuzz_common.h"

#include <dirent.h>
#include <sys/stat.h>

#define CKF_W 48
#define CKF_H 48
#define CKF_NF 10
#define CKF_MAXF 16

typedef struct ckf_file {
    char name[256];
    uint8_t *data;
    size_t size;
} ckf_file;

static struct {
    int ready;
    char root[512], frames[600], run[600];
    ckf_file pristine[CKF_MAXF];
    int npristine;
    size_t ck_v_off; /* offset of v[0..5] in the pristine checkpoint */
    ckf_file before[CKF_MAXF];
    int nbefore;
} ckf;

static void ckf_die(const char *what)
{
    fprintf(stderr, "fuzz harness: %s\n", what);
    abort();
}

static uint64_t ckf_fnv(const uint8_t *p, size_t n)
{
    uint64_t h = 0xcbf29ce484222325ULL;
    for (size_t i = 0; i < n; i++) {
        h ^= p[i];
        h *= 0x100000001b3ULL;
    }
    return h;
}

static uint8_t *ckf_slurp(const char *path, size_t *n)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return NULL;
    size_t cap = 4096, len = 0;
    uint8_t *p = malloc(cap);
    for (;;) {
        if (!p)
            ckf_die("out of memory");
        size_t k = fread(p + len, 1, cap - len, f);
        len += k;
        if (len < cap)
            break;
        cap *= 2;
        p = realloc(p, cap);
    }
    fclose(f);
    *n = len;
    return p;
}

/* Every file of dir (regular or not, hidden too), sorted by name. */
static int ckf_list(const char *dir, ckf_file *out, int max)
{
    DIR *d = opendir(dir);
    if (!d)
        ckf_die("cannot list the run directory");
    int n = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, ".."))
            continue;
        if (n == max)
            ckf_die("too many files in the run directory");
        snprintf(out[n].name, sizeof out[n].name, "%s", e->d_name);
        char p[1024];
        snprintf(p, sizeof p, "%s/%s", dir, e->d_name);
        out[n].data = ckf_slurp(p, &out[n].size);
        if (!out[n].data)
            ckf_die("cannot read a file of the run directory");
        n++;
    }
    closedir(d);
    for (int i = 1; i < n; i++)
        for (int j = i; j > 0 && strcmp(out[j - 1].name, out[j].name) > 0; j--) {
            ckf_file t = out[j];
            out[j] = out[j - 1];
            out[j - 1] = t;
        }
    return n;
}

static void ckf_release(ckf_file *f, int n)
{
    for (int i = 0; i < n; i++)
        free(f[i].data);
}

static void ckf_write(const char *dir, const char *name, const uint8_t *p, size_t n)
{
    char path[1024];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    fuzz_write_file(path, p, n);
}

static void ckf_clear(const char *dir)
{
    DIR *d = opendir(dir);
    if (!d)
        return;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, ".."))
            continue;
        char p[1024];
        snprintf(p, sizeof p, "%s/%s", dir, e->d_name);
        remove(p);
    }
    closedir(d);
}

static void ckf_cleanup(void)
{
    if (!ckf.ready)
        return;
    ckf_clear(ckf.run);
    ckf_clear(ckf.frames);
    rmdir(ckf.run);
    rmdir(ckf.frames);
    rmdir(ckf.root);
}

typedef struct ckf_stop {
    volatile int flag;
    int64_t after;
} ckf_stop;

static void ckf_progress(void *ud, const sp_progress *p)
{
    ckf_stop *st = ud;
    if (!strcmp(p->phase, "detect") && st->after >= 0 && p->done >= st->after)
        st->flag = 1;
}

static void ckf_settings(sp_measure_settings *s, ckf_stop *st)
{
    sp_measure_settings_default(s);
    s->source.fps = 100;
    s->mm_per_px = 0.1;
    s->report = 0;
    s->boot = 20;
    s->bg_frames = 10;
    s->threads = 1; /* batches of 4 frames */
    s->track = 1;
    s->stop = &st->flag;
    s->progress = ckf_progress;
    s->progress_ud = st;
}

static void ckf_init(void)
{
    const char *tmp = getenv("TMPDIR");
    snprintf(ckf.root, sizeof ckf.root, "%s/spume-fuzzckpt-XXXXXX", tmp && *tmp ? tmp : "/tmp");
    if (!mkdtemp(ckf.root))
        ckf_die("cannot make a temporary directory");
    snprintf(ckf.frames, sizeof ckf.frames, "%s/frames", ckf.root);
    snprintf(ckf.run, sizeof ckf.run, "%s/run", ckf.root);
    if (mkdir(ckf.frames, 0777) || mkdir(ckf.run, 0777))
        ckf_die("cannot make the run directories");
    ckf.ready = 1;
    atexit(ckf_cleanup);
    static uint8_t px[CKF_W * CKF_H];
    for (int f = 0; f < CKF_NF; f++) {
        for (int y = 0; y < CKF_H; y++)
            for (int x = 0; x < CKF_W; x++)
                px[y * CKF_W + x] = (uint8_t)(190 + (x + y) / 8);
        const double cx[2] = {14, 33}, r[2] = {5, 6}, v[2] = {2.0, 3.0}, y0[2] = {40, 50};
        for (int k = 0; k < 2; k++) {
            double cy = y0[k] - v[k] * f;
            for (int y = 0; y < CKF_H; y++)
                for (int x = 0; x < CKF_W; x++)
                    if ((x - cx[k]) * (x - cx[k]) + (y - cy) * (y - cy) <= r[k] * r[k])
                        px[y * CKF_W + x] = 45;
        }
        char hdr[64], name[32];
        int hn = snprintf(hdr, sizeof hdr, "P5\n%d %d\n255\n", CKF_W, CKF_H);
        uint8_t file[sizeof hdr + sizeof px];
        memcpy(file, hdr, (size_t)hn);
        memcpy(file + hn, px, sizeof px);
        snprintf(name, sizeof name, "f%04d.pgm", f);
        ckf_write(ckf.frames, name, file, (size_t)hn + sizeof px);
    }
    sp_measure_settings s;
    ckf_stop st = {0, 4};
    sp_measure_report rep;
    sp_error err;
    ckf_settings(&s, &st);
    if (sp_measure(ckf.frames, ckf.run, &s, &rep, &err) || rep.complete) {
        fprintf(stderr, "fuzz harness: the interrupted base run failed: %s\n", err.msg);
        abort();
    }
    ckf.npristine = ckf_list(ckf.run, ckf.pristine, CKF_MAXF);
    const ckf_file *ck = NULL;
    for (int i = 0; i < ckf.npristine; i++)
        if (!strcmp(ckf.pristine[i].name, "resume.checkpoint"))
            ck = &ckf.pristine[i];
    int have_links = 0;
    for (int i = 0; i < ckf.npristine; i++)
        have_links |= !strcmp(ckf.pristine[i].name, "resume.links");
    if (!ck || !have_links)
        ckf_die("the base run left no checkpoint or spill");
    /* Layout (sp_resume_save): magic 8, version 4, byte order 4, bubble size 4, then two text blocks
     * of a uint32 length and the bytes, then v[6] (int64) and the spill hash. */
    size_t off = 20;
    for (int k = 0; k < 2; k++) {
        uint32_t n;
        if (off + 4 > ck->size)
            ckf_die("short checkpoint");
        memcpy(&n, ck->data + off, 4);
        off += 4 + (size_t)n;
    }
    if (off + 56 + 8 > ck->size)
        ckf_die("short checkpoint");
    ckf.ck_v_off = off;
    const char *dump = getenv("SPUME_FUZZ_DUMP_SEEDS");
    if (dump && *dump) {
        for (int sel = 0; sel < 4; sel++) {
            const char *want = sel & 1 ? "resume.links" : "resume.checkpoint";
            for (int i = 0; i < ckf.npristine; i++)
                if (!strcmp(ckf.pristine[i].name, want)) {
                    uint8_t *b = malloc(ckf.pristine[i].size + 1);
                    if (!b)
                        ckf_die("out of memory");
                    b[0] = (uint8_t)sel;
                    memcpy(b + 1, ckf.pristine[i].data, ckf.pristine[i].size);
                    char name[64];
                    snprintf(name, sizeof name, "seed-%s%s", sel & 1 ? "links" : "checkpoint",
                             sel & 2 ? "-fixsum" : "");
                    ckf_write(dump, name, b, ckf.pristine[i].size + 1);
                    free(b);
                }
        }
    }
}

static void ckf_contract(int rc, const sp_error *err, int which, int fixed)
{
    if (rc != SP_ERR_INPUT && rc != SP_ERR_INTERNAL) {
        fprintf(stderr, "contract: status %d is neither 1 nor 2\n", rc);
        abort();
    }
    if (err->code != rc || !err->msg[0]) {
        fprintf(stderr, "contract: status %d with error code %d, message \"%s\"\n", rc, err->code, err->msg);
        abort();
    }
    for (const char *c = err->msg; *c; c++)
        if ((unsigned char)*c < 0x20 || *c == 0x7f) {
            fprintf(stderr, "contract: control character 0x%02x in the message \"%s\"\n", (unsigned char)*c,
                    err->msg);
            abort();
        }
    const char *name = which ? "resume.links" : "resume.checkpoint";
    int named = strstr(err->msg, name) != NULL;
    /* With agreeing checksums, the checkpoint's records of the spill and of the two tables cannot be
     * told apart from changes to those files: the refusal may name any of the four. */
    if (!named && fixed)
        named = strstr(err->msg, "resume.links") || strstr(err->msg, "resume.checkpoint") ||
                strstr(err->msg, "bubbles.csv") || strstr(err->msg, "frames.csv");
    if (!named) {
        fprintf(stderr, "contract: message \"%s\" does not name %s\n", err->msg, name);
        abort();
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (!ckf.ready)
        ckf_init();
    if (size < 1)
        return 0;
    const int which = data[0] & 1, fixed = (data[0] >> 1) & 1;
    const uint8_t *in = data + 1;
    size_t n = size - 1;

    /* Restore the interrupted run, then put the input in place. */
    ckf_clear(ckf.run);
    const ckf_file *ck = NULL;
    for (int i = 0; i < ckf.npristine; i++) {
        ckf_write(ckf.run, ckf.pristine[i].name, ckf.pristine[i].data, ckf.pristine[i].size);
        if (!strcmp(ckf.pristine[i].name, "resume.checkpoint"))
            ck = &ckf.pristine[i];
    }
    uint8_t *buf = malloc(n + ck->size + 8);
    if (!buf)
        ckf_die("out of memory");
    if (!which) {
        memcpy(buf, in, n);
        if (fixed && n >= 8) {
            uint64_t h = ckf_fnv(buf, n - 8);
            memcpy(buf + n - 8, &h, 8);
        }
        ckf_write(ckf.run, "resume.checkpoint", buf, n);
    } else {
        ckf_write(ckf.run, "resume.links", in, n);
        if (fixed) {
            memcpy(buf, ck->data, ck->size);
            int64_t len = (int64_t)n;
            uint64_t h = ckf_fnv(in, n);
            memcpy(buf + ckf.ck_v_off + 16, &len, 8);
            memcpy(buf + ckf.ck_v_off + 48, &h, 8);
            h = ckf_fnv(buf, ck->size - 8);
            memcpy(buf + ck->size - 8, &h, 8);
            ckf_write(ckf.run, "resume.checkpoint", buf, ck->size);
        }
    }
    free(buf);
    /* The pristine file itself (under either checksum rule) must resume: refusing everything would
     * pass every other check. */
    int pristine = 0;
    for (int i = 0; i < ckf.npristine; i++)
        if (!strcmp(ckf.pristine[i].name, which ? "resume.links" : "resume.checkpoint"))
            pristine = ckf.pristine[i].size == n && !memcmp(ckf.pristine[i].data, in, n);
    ckf.nbefore = ckf_list(ckf.run, ckf.before, CKF_MAXF);

    sp_measure_settings s;
    ckf_stop st = {0, -1};
    sp_measure_report rep;
    sp_error err;
    sp_error_clear(&err);
    ckf_settings(&s, &st);
    s.resume = 1;
    int rc = sp_measure(ckf.frames, ckf.run, &s, &rep, &err);

    ckf_file after[CKF_MAXF];
    int nafter = ckf_list(ckf.run, after, CKF_MAXF);
    if (rc != SP_OK && pristine) {
        fprintf(stderr, "contract: the intact interrupted run was refused: %s\n", err.msg);
        abort();
    }
    if (rc != SP_OK) {
        ckf_contract(rc, &err, which, fixed);
        int same = nafter == ckf.nbefore;
        for (int i = 0; same && i < nafter; i++)
            same = !strcmp(after[i].name, ckf.before[i].name) && after[i].size == ckf.before[i].size &&
                   !memcmp(after[i].data, ckf.before[i].data, after[i].size);
        if (!same) {
            fprintf(stderr, "contract: refused (%s) but the directory changed\n", err.msg);
            abort();
        }
    } else {
        int has_ck = 0, has_b = 0, has_sum = 0;
        for (int i = 0; i < nafter; i++) {
            has_ck |= !strcmp(after[i].name, "resume.checkpoint") || !strcmp(after[i].name, "resume.links");
            has_b |= !strcmp(after[i].name, "bubbles.csv") && after[i].size > 0;
            has_sum |= !strcmp(after[i].name, "summary.json") && after[i].size > 0;
        }
        /* Well-formed values under a fixed checksum are taken as written (FNV-1a guards against
         * damage, not tampering); what is checked is that such a run completes. */
        if (!rep.complete || has_ck || !has_b || !has_sum) {
            fprintf(stderr, "contract: accepted but incomplete (complete %d, frames %lld)\n", rep.complete,
                    (long long)rep.frames);
            abort();
        }
    }
    ckf_release(after, nafter);
    ckf_release(ckf.before, ckf.nbefore);
    ckf.nbefore = 0;
    return 0;
}
