/* JSON writer: escaping, nesting, non-finite numbers; output parsed back by hand. */
#include "check.h"
#include "core/jsonw.h"
#include "core/outfile.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

int main(void)
{
    char buf[4096] = {0};
    FILE *f = fmemopen(buf, sizeof buf - 1, "w");
    sp_jsonw j;
    sp_jsonw_init(&j, f);
    sp_jsonw_obj(&j);
    sp_jsonw_kstr(&j, "s", "a\"b\\c\nd\x01");
    sp_jsonw_knum(&j, "x", 0.5);
    sp_jsonw_knum(&j, "nan", NAN);
    sp_jsonw_kint(&j, "i", -42);
    sp_jsonw_key(&j, "arr");
    sp_jsonw_arr(&j);
    sp_jsonw_int(&j, 1);
    sp_jsonw_int(&j, 2);
    sp_jsonw_arr_end(&j);
    sp_jsonw_key(&j, "empty");
    sp_jsonw_obj(&j);
    sp_jsonw_obj_end(&j);
    sp_jsonw_obj_end(&j);
    fclose(f);
    const char *want = "{\n  \"s\": \"a\\\"b\\\\c\\nd\\u0001\",\n  \"x\": 0.5,\n  \"nan\": null,\n  \"i\": -42,\n"
                       "  \"arr\": [\n    1,\n    2\n  ],\n  \"empty\": {}\n}\n";
    CHECK(strcmp(buf, want) == 0, "got:\n%s", buf);

    /* Output files appear under their final name only on commit. */
    char dir[] = "/tmp/spume-outfile-XXXXXX";
    CHECK(mkdtemp(dir) != NULL, "mkdtemp");
    sp_outfile o;
    sp_error err;
    CHECK(sp_outfile_open(&o, dir, "t.csv", &err) == 0, "open");
    fputs("a,b\n", o.f);
    struct stat st;
    CHECK(stat(o.final, &st) != 0, "no final file before commit");
    CHECK(sp_outfile_commit(&o, &err) == 0, "commit: %s", err.msg);
    CHECK(stat(o.final, &st) == 0 && st.st_size == 4, "final file after commit");
    unlink(o.final);
    CHECK(sp_outfile_open(&o, dir, "u.csv", &err) == 0, "open 2");
    char tmp[4096];
    strcpy(tmp, o.tmp);
    sp_outfile_abort(&o);
    CHECK(stat(tmp, &st) != 0 && stat(o.final, &st) != 0, "abort leaves nothing");
    CHECK(sp_outdir_prepare("/proc/spume-cannot-exist/x", &err) == SP_ERR_INPUT, "unwritable dir refused");
    CHECK(strstr(err.msg, "/proc/spume-cannot-exist/x") != NULL, "message names the dir: %s", err.msg);
    rmdir(dir);
    return check_report();
}
