/* The cautions every report quotes are SAFETY.md's, word for word: the
 * compiled-in sentences (src/report/cautions.c) must each stand in the file,
 * and the file's numbered cautions must all be compiled in. */
#include "support.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/report.h"

static char *read_safety(void)
{
    const char *src = getenv("REMTONE_SOURCE");
    char path[4096];
    snprintf(path, sizeof path, "%s/SAFETY.md", src ? src : ".");
    FILE *f = fopen(path, "rb");
    if (!f)
        fail_msg("cannot open %s", path);
    static char buf[1 << 16];
    size_t n = fread(buf, 1, sizeof buf - 1, f);
    fclose(f);
    buf[n] = '\0';
    return buf;
}

static void every_caution_is_in_safety_md(void **state)
{
    (void)state;
    const char *text = read_safety();
    assert_true(rt_caution_count() >= 9);
    for (size_t i = 0; i < rt_caution_count(); i++)
        assert_non_null(strstr(text, rt_caution(i)));
}

static void every_numbered_caution_is_compiled_in(void **state)
{
    (void)state;
    const char *text = strstr(read_safety(), "## Cautions");
    assert_non_null(text);
    size_t numbered = 0;
    for (const char *line = text; line && *line; line = strchr(line, '\n')) {
        if (*line == '\n')
            line++;
        if (line[0] >= '1' && line[0] <= '9' && line[1] == '.')
            numbered++;
        if (strncmp(line, "## What", 7) == 0)
            break;
    }
    assert_int_equal(numbered, rt_caution_count());
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(every_caution_is_in_safety_md),
        cmocka_unit_test(every_numbered_caution_is_compiled_in),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
