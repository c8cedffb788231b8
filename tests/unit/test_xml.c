/* remtone XML scoring files: the documented example loads with every value
 * it states; each kind of invalid file is refused with the file, the line
 * and the reason; documents with a DTD (entity expansion, external entities)
 * are refused before anything is expanded or read; the size limit holds;
 * written files read back to the same timeline. The format is remtone's own
 * (docs/scoring-file.md), so the reference is that page and the XML 1.0
 * rules for well-formedness (W3C XML 1.0, fifth edition). */
#include "support.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "remtone/roles.h"
#include "remtone/timeline.h"

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void expect_stage_range(const rt_timeline *tl, size_t first, size_t end, rt_stage s)
{
    for (size_t i = first; i < end; i++)
        if (tl->stages[i] != s)
            fail_msg("epoch %zu: stage %s, expected %s", i, rt_stage_name((rt_stage)tl->stages[i]),
                     rt_stage_name(s));
}

/* Every value docs/remtone-scoring-example.xml states in its elements and
 * comments (the example is the documentation; this keeps the two in step). */
static void check_example(const rt_timeline *tl)
{
    assert_true(tl->epoch_s == 30.0);
    assert_int_equal(tl->n_epochs, 90);
    expect_stage_range(tl, 0, 4, RT_STAGE_W);
    expect_stage_range(tl, 4, 10, RT_STAGE_N1);
    expect_stage_range(tl, 10, 30, RT_STAGE_N2);
    expect_stage_range(tl, 30, 50, RT_STAGE_N3);
    expect_stage_range(tl, 50, 58, RT_STAGE_N2);
    expect_stage_range(tl, 58, 60, RT_STAGE_N1);
    expect_stage_range(tl, 60, 80, RT_STAGE_R);
    expect_stage_range(tl, 80, 82, RT_STAGE_UNSCORED);
    expect_stage_range(tl, 82, 90, RT_STAGE_W);
    assert_true(tl->lights_off_s == 45.0);
    assert_true(tl->lights_on_s == 2670.0);
    assert_string_equal(tl->scorer, "Scorer A (fictional)");
    assert_string_equal(tl->scored_on, "2026-03-14");
    assert_int_equal(tl->n_events, 4);
    const struct { double onset, dur; rt_event_type type; int role; } ev[4] = {
        {610, 18.5, RT_EVENT_HYPOPNEA, -1},
        {627.5, 4, RT_EVENT_RESP_AROUSAL, -1},
        {1920, 6, RT_EVENT_ARTIFACT, RT_ROLE_CHIN},
        {2100, 1.5, RT_EVENT_LIMB_MOVEMENT, RT_ROLE_LEG_LEFT}};
    for (int i = 0; i < 4; i++) {
        assert_true(tl->events[i].onset_s == ev[i].onset);
        assert_true(tl->events[i].duration_s == ev[i].dur);
        assert_int_equal(tl->events[i].type, ev[i].type);
        assert_int_equal(tl->events[i].role, ev[i].role);
    }
    /* 13 minis ordered by onset then role: 1800 chin, 1800 arm-left, then
     * chin at 1803, 1806 ... 1833; phasic at 1800, 1809, 1812; tonic at
     * 1830 and 1833. */
    assert_int_equal(tl->n_manual, 13);
    assert_true(tl->manual[0].onset_s == 1800.0);
    assert_int_equal(tl->manual[0].role, RT_ROLE_CHIN);
    assert_int_equal(tl->manual[1].role, RT_ROLE_ARM_LEFT);
    assert_true(tl->manual[1].onset_s == 1800.0);
    for (size_t i = 2; i < 13; i++) {
        double onset = 1803.0 + 3.0 * (double)(i - 2);
        assert_true(tl->manual[i].onset_s == onset);
        assert_int_equal(tl->manual[i].role, RT_ROLE_CHIN);
        assert_int_equal(tl->manual[i].phasic, onset == 1809.0 || onset == 1812.0);
        assert_int_equal(tl->manual[i].tonic, onset == 1830.0 || onset == 1833.0);
    }
    assert_int_equal(tl->manual[0].phasic, 1);
    assert_int_equal(tl->manual[1].phasic, 0);
}

static const char *example_path(void)
{
    static char path[4096];
    const char *src = getenv("REMTONE_SOURCE");
    assert_non_null(src);
    snprintf(path, sizeof path, "%s/docs/remtone-scoring-example.xml", src);
    return path;
}

static void example_loads(void **state)
{
    (void)state;
    rt_error err;
    rt_timeline *tl = rt_test_timeline();
    if (rt_timeline_load_xml(tl, example_path(), &err) != RT_OK)
        fail_msg("%s", err.message);
    check_example(tl);
    rt_timeline_free(tl);
    /* The same through the format sniffer (docs/staging.md: '<' means XML). */
    tl = rt_test_timeline();
    if (rt_timeline_load_staging(tl, example_path(), NULL, &err) != RT_OK)
        fail_msg("%s", err.message);
    check_example(tl);
    rt_timeline_free(tl);
}

/* Loads text as a scoring file; expects RT_ERR_STAGING and each needle in
 * the message. The timeline must be left as it was (empty). */
static void expect_refusal(const char *name, const char *text, const char *needle1,
                           const char *needle2)
{
    const char *dir = rt_test_dir("xml_bad");
    const char *path = rt_test_text_file(dir, name, text);
    char saved[4400];
    snprintf(saved, sizeof saved, "%s", path);
    rt_error err;
    rt_timeline *tl = rt_test_timeline();
    rt_status st = rt_timeline_load_staging(tl, saved, NULL, &err);
    if (st != RT_ERR_STAGING)
        fail_msg("%s: status %d, message: %s", name, (int)st, st == RT_OK ? "" : err.message);
    if (!strstr(err.message, saved))
        fail_msg("%s: message does not name the file: %s", name, err.message);
    if (needle1 && !strstr(err.message, needle1))
        fail_msg("%s: \"%s\" not in: %s", name, needle1, err.message);
    if (needle2 && !strstr(err.message, needle2))
        fail_msg("%s: \"%s\" not in: %s", name, needle2, err.message);
    assert_int_equal(tl->n_epochs, 0);
    assert_int_equal(tl->n_events, 0);
    assert_int_equal(tl->n_manual, 0);
    rt_timeline_free(tl);
}

#define HEAD "<?xml version=\"1.0\"?>\n<remtone-scoring version=\"1\">\n"

static void invalid_files(void **state)
{
    (void)state;
    /* XML 1.0 section 3: an end tag must match the start tag. */
    expect_refusal("mismatch.xml",
                   HEAD "<stages>\n<run start-epoch=\"0\" epochs=\"1\" stage=\"W\">\n</stages>\n"
                        "</remtone-scoring>\n",
                   "line 5", "not well-formed");
    /* XML 1.0 section 2.8: the XML declaration only at the very start (the
     * sniffer allows a BOM and white space; the parser then refuses). */
    expect_refusal("late_decl.dat", "\xef\xbb\xbf  \n<?xml version=\"1.0\"?><x/>", "line 2",
                   "not well-formed");
    expect_refusal("root.xml", "<?xml version=\"1.0\"?>\n<scoring version=\"1\"/>\n", "line 2",
                   "schema");
    expect_refusal("no_stage.xml",
                   HEAD "<stages>\n<run start-epoch=\"0\" epochs=\"2\"/>\n</stages>\n"
                        "</remtone-scoring>\n",
                   "line 4", "stage");
    expect_refusal("no_version.xml",
                   "<remtone-scoring>\n<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"W\"/>"
                   "</stages></remtone-scoring>\n",
                   "line 1", "version");
    expect_refusal("bad_stage.xml",
                   HEAD "<stages>\n<run start-epoch=\"0\" epochs=\"2\" stage=\"W\"/>\n"
                        "<run start-epoch=\"2\" epochs=\"2\" stage=\"REM\"/>\n</stages>\n"
                        "</remtone-scoring>\n",
                   "line 5", "REM");
    expect_refusal("bad_list.xml",
                   HEAD "<stages>\n<epochs start-epoch=\"0\">W N1\nN5</epochs>\n</stages>\n"
                        "</remtone-scoring>\n",
                   "line 4", "N5");
    expect_refusal("bad_number.xml",
                   HEAD "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"W\"/></stages>\n"
                        "<events>\n<event onset-s=\"12,5\" duration-s=\"3\" type=\"apnea\"/>\n"
                        "</events>\n</remtone-scoring>\n",
                   "line 5", "12,5");
    expect_refusal("exponent.xml",
                   HEAD "<lights off-s=\"1e3\"/>\n"
                        "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"W\"/></stages>\n"
                        "</remtone-scoring>\n",
                   "line 3", "1e3");
    /* Runs in time order without overlap (docs/staging.md): both lines named. */
    expect_refusal("overlap.xml",
                   HEAD "<stages>\n<run start-epoch=\"0\" epochs=\"4\" stage=\"W\"/>\n"
                        "<run start-epoch=\"3\" epochs=\"2\" stage=\"N1\"/>\n</stages>\n"
                        "</remtone-scoring>\n",
                   "line 5", "overlaps line 4");
    expect_refusal("event_type.xml",
                   HEAD "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"W\"/></stages>\n"
                        "<events>\n"
                        "<event onset-s=\"1\" duration-s=\"3\" type=\"apnea\"/>\n"
                        "<event onset-s=\"5\" duration-s=\"3\" type=\"desaturation\"/>\n"
                        "</events>\n</remtone-scoring>\n",
                   "line 6", "desaturation");
    expect_refusal("lights.xml",
                   HEAD "<lights off-s=\"600\" on-s=\"300\"/>\n"
                        "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"W\"/></stages>\n"
                        "</remtone-scoring>\n",
                   "line 3", "not after lights off");
    expect_refusal("mini_grid.xml",
                   HEAD "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"R\"/></stages>\n"
                        "<manual-rswa>\n<mini onset-s=\"4\" role=\"chin\" phasic=\"1\" "
                        "tonic=\"0\"/>\n</manual-rswa>\n</remtone-scoring>\n",
                   "line 5", "3-s grid");
    expect_refusal("mini_twice.xml",
                   HEAD "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"R\"/></stages>\n"
                        "<manual-rswa>\n<minis onset-s=\"0\" role=\"chin\" phasic=\"0000\" "
                        "tonic=\"0000\"/>\n<mini onset-s=\"6\" role=\"chin\" phasic=\"1\" "
                        "tonic=\"0\"/>\n</manual-rswa>\n</remtone-scoring>\n",
                   "line 6", "scored twice");
    expect_refusal("minis_len.xml",
                   HEAD "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"R\"/></stages>\n"
                        "<manual-rswa>\n<minis onset-s=\"0\" role=\"chin\" phasic=\"0000\" "
                        "tonic=\"000\"/>\n</manual-rswa>\n</remtone-scoring>\n",
                   "line 5", "tonic lists 3");
    expect_refusal("empty.xml",
                   HEAD "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"?\"/></stages>\n"
                        "</remtone-scoring>\n",
                   "staging is empty", NULL);
    expect_refusal("unknown_element.xml",
                   HEAD "<stages><run start-epoch=\"0\" epochs=\"2\" stage=\"W\"/></stages>\n"
                        "<notes>x</notes>\n</remtone-scoring>\n",
                   "line 4", "notes");
}

/* Loads a hostile document with a watchdog: a parser that expanded the
 * entities or opened the external file would not return in time (the FIFO
 * below blocks any reader until a writer appears, and none ever does). */
static void expect_doctype_refused(const char *name, const char *text)
{
    const char *dir = rt_test_dir("xml_hostile");
    char path[4400];
    snprintf(path, sizeof path, "%s", rt_test_text_file(dir, name, text));
    rt_error err;
    rt_timeline *tl = rt_test_timeline();
    alarm(20); /* the test dies rather than hang */
    double t0 = now_s();
    rt_status st = rt_timeline_load_staging(tl, path, NULL, &err);
    double took_s = now_s() - t0;
    alarm(0);
    assert_int_equal(st, RT_ERR_STAGING);
    if (!strstr(err.message, "document type declaration") || !strstr(err.message, "line 2"))
        fail_msg("%s: %s", name, err.message);
    /* A refusal reads a few hundred bytes: 1 s is a generous bound on any
     * machine, and entity expansion of the laughs file takes far longer. */
    assert_true(took_s < 1.0);
    assert_int_equal(tl->n_epochs, 0);
    rt_timeline_free(tl);
}

static void hostile_documents_refused(void **state)
{
    (void)state;
    /* The "billion laughs": ten levels of ten references each. */
    char laughs[4096];
    size_t n = (size_t)snprintf(laughs, sizeof laughs,
                                "<?xml version=\"1.0\"?>\n<!DOCTYPE remtone-scoring [\n"
                                "<!ENTITY lol0 \"lol\">\n");
    for (int i = 1; i < 10; i++) {
        n += (size_t)snprintf(laughs + n, sizeof laughs - n, "<!ENTITY lol%d \"", i);
        for (int k = 0; k < 10; k++)
            n += (size_t)snprintf(laughs + n, sizeof laughs - n, "&lol%d;", i - 1);
        n += (size_t)snprintf(laughs + n, sizeof laughs - n, "\">\n");
    }
    snprintf(laughs + n, sizeof laughs - n,
             "]>\n<remtone-scoring version=\"1\"><scored-by name=\"&lol9;\"/>"
             "<stages><run start-epoch=\"0\" epochs=\"1\" stage=\"W\"/></stages>"
             "</remtone-scoring>\n");
    expect_doctype_refused("laughs.xml", laughs);

    expect_doctype_refused("passwd.xml",
                           "<?xml version=\"1.0\"?>\n<!DOCTYPE remtone-scoring [\n"
                           "<!ENTITY x SYSTEM \"file:///etc/passwd\">]>\n"
                           "<remtone-scoring version=\"1\"><scored-by name=\"&x;\"/>"
                           "<stages><run start-epoch=\"0\" epochs=\"1\" stage=\"W\"/></stages>"
                           "</remtone-scoring>\n");

    /* External entity and external DTD pointing at a FIFO: opening it for
     * reading would block, so returning at all shows it was never opened. */
    const char *dir = rt_test_dir("xml_fifo");
    char fifo[4400], text[9000];
    snprintf(fifo, sizeof fifo, "%s/trap", dir);
    if (mkfifo(fifo, 0600) != 0)
        fail_msg("mkfifo %s: %s", fifo, strerror(errno));
    snprintf(text, sizeof text,
             "<?xml version=\"1.0\"?>\n<!DOCTYPE remtone-scoring [\n"
             "<!ENTITY x SYSTEM \"file://%s\">]>\n"
             "<remtone-scoring version=\"1\"><scored-by name=\"&x;\"/>"
             "<stages><run start-epoch=\"0\" epochs=\"1\" stage=\"W\"/></stages>"
             "</remtone-scoring>\n",
             fifo);
    expect_doctype_refused("fifo_entity.xml", text);
    snprintf(text, sizeof text,
             "<?xml version=\"1.0\"?>\n<!DOCTYPE remtone-scoring SYSTEM \"%s\">\n"
             "<remtone-scoring version=\"1\">"
             "<stages><run start-epoch=\"0\" epochs=\"1\" stage=\"W\"/></stages>"
             "</remtone-scoring>\n",
             fifo);
    expect_doctype_refused("fifo_dtd.xml", text);
}

/* Files over 64 MiB are refused before being read (docs/scoring-file.md). A
 * sparse file costs no disk; the '<' at its start makes the sniffer say XML. */
static void size_limit(void **state)
{
    (void)state;
    const char *dir = rt_test_dir("xml_big");
    char path[4400];
    snprintf(path, sizeof path, "%s/big.xml", dir);
    int fd = open(path, O_WRONLY | O_CREAT | O_TRUNC, 0644);
    assert_true(fd >= 0);
    assert_int_equal(write(fd, "<", 1), 1);
    assert_int_equal(ftruncate(fd, 64L * 1024 * 1024 + 1), 0);
    close(fd);
    rt_error err;
    rt_timeline *tl = rt_test_timeline();
    double t0 = now_s();
    assert_int_equal(rt_timeline_load_staging(tl, path, NULL, &err), RT_ERR_STAGING);
    assert_true(now_s() - t0 < 1.0);
    assert_non_null(strstr(err.message, "larger than the 64 MiB"));
    /* Exactly at the limit is not refused for its size: it fails later, for
     * its content (NUL bytes are not XML). */
    fd = open(path, O_WRONLY);
    assert_int_equal(ftruncate(fd, 64L * 1024 * 1024), 0);
    close(fd);
    assert_int_equal(rt_timeline_load_staging(tl, path, NULL, &err), RT_ERR_STAGING);
    assert_null(strstr(err.message, "larger than"));
    /* In memory too. */
    assert_int_equal(rt_timeline_load_xml_memory(tl, "<", 64L * 1024 * 1024 + 1, "mem", &err),
                     RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "larger than 64 MiB"));
    rt_timeline_free(tl);
}

/* A timeline with every feature survives writing and reading back. */
static void write_read_back(void **state)
{
    (void)state;
    rt_error err;
    rt_timeline *tl = rt_test_timeline();
    tl->epoch_s = 20.0; /* an epoch length other than 30 s is carried */
    assert_int_equal(rt_timeline_add_stage_run(tl, 0, 60, RT_STAGE_W, "t", 0, &err), RT_OK);
    assert_int_equal(rt_timeline_add_stage_run(tl, 100, 40, RT_STAGE_R, "t", 0, &err), RT_OK);
    assert_int_equal(rt_timeline_add_event(tl, 0.1, 1.0 / 3.0, RT_EVENT_SNORE, "t", 0, &err), RT_OK);
    assert_int_equal(rt_timeline_add_event_role(tl, 101.25, 0, RT_EVENT_ARTIFACT, RT_ROLE_ARM_RIGHT,
                                                "t", 0, &err), RT_OK);
    assert_int_equal(rt_timeline_add_event_role(tl, 0.1, 2, RT_EVENT_AROUSAL, RT_ROLE_CHIN, "t",
                                                0, &err), RT_OK);
    /* 20-s epochs hold six 3-s minis: 100, 103 ... 115, then 120 starts anew. */
    assert_int_equal(rt_timeline_add_manual(tl, 115, RT_ROLE_CHIN, true, true, "t", 0, &err), RT_OK);
    assert_int_equal(rt_timeline_add_manual(tl, 118, RT_ROLE_CHIN, true, true, "t", 0, &err),
                     RT_ERR_STAGING);
    assert_int_equal(rt_timeline_add_manual(tl, 120, RT_ROLE_LEG_RIGHT, false, true, "t", 0, &err),
                     RT_OK);
    assert_int_equal(rt_timeline_add_manual(tl, 100, RT_ROLE_CHIN, true, false, "t", 0, &err), RT_OK);
    tl->lights_off_s = 12.75;
    tl->lights_on_s = 139.5;
    snprintf(tl->scorer, sizeof tl->scorer, "B & <C> \"scorer\"");
    snprintf(tl->scored_on, sizeof tl->scored_on, "2026-01-02T03:04:05");

    const char *dir = rt_test_dir("xml_write");
    char path[4400];
    snprintf(path, sizeof path, "%s/out.xml", dir);
    if (rt_timeline_write_xml(tl, path, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_timeline *back = rt_test_timeline();
    if (rt_timeline_load_staging(back, path, NULL, &err) != RT_OK)
        fail_msg("%s", err.message);
    assert_true(back->epoch_s == 20.0);
    assert_int_equal(back->n_epochs, tl->n_epochs);
    assert_memory_equal(back->stages, tl->stages, tl->n_epochs);
    assert_int_equal(back->n_events, 3);
    for (size_t i = 0; i < 3; i++) {
        assert_true(back->events[i].onset_s == tl->events[i].onset_s);
        assert_true(back->events[i].duration_s == tl->events[i].duration_s);
        assert_int_equal(back->events[i].type, tl->events[i].type);
        assert_int_equal(back->events[i].role, tl->events[i].role);
    }
    assert_int_equal(back->n_manual, 3);
    for (size_t i = 0; i < 3; i++) {
        assert_true(back->manual[i].onset_s == tl->manual[i].onset_s);
        assert_int_equal(back->manual[i].role, tl->manual[i].role);
        assert_int_equal(back->manual[i].phasic, tl->manual[i].phasic);
        assert_int_equal(back->manual[i].tonic, tl->manual[i].tonic);
    }
    assert_true(back->manual[0].onset_s == 100.0 && back->manual[2].onset_s == 120.0);
    assert_true(back->lights_off_s == 12.75 && back->lights_on_s == 139.5);
    assert_string_equal(back->scorer, tl->scorer);
    assert_string_equal(back->scored_on, tl->scored_on);

    /* A second stage source is refused and leaves the timeline as it was. */
    assert_int_equal(rt_timeline_load_xml(back, path, &err), RT_ERR_STAGING);
    assert_non_null(strstr(err.message, "already loaded"));
    assert_int_equal(back->n_events, 3);
    rt_timeline_free(back);

    /* Nothing staged: nothing to write. */
    rt_timeline *empty = rt_test_timeline();
    assert_int_equal(rt_timeline_write_xml(empty, path, &err), RT_ERR_USAGE);
    rt_timeline_free(empty);
    rt_timeline_free(tl);
}

/* Random bytes spliced into the example never crash the reader, and every
 * failure is a staging error with a message. */
static void mutated_example_never_crashes(void **state)
{
    (void)state;
    uint64_t seed = rt_test_seed();
    FILE *f = fopen(example_path(), "rb");
    assert_non_null(f);
    static char base[16384];
    size_t len = fread(base, 1, sizeof base, f);
    fclose(f);
    static char buf[16384];
    for (int round = 0; round < 200; round++) {
        memcpy(buf, base, len);
        for (int k = 0; k < 4; k++) {
            seed = seed * 6364136223846793005ULL + 1442695040888963407ULL;
            size_t at = (size_t)(seed >> 33) % len;
            buf[at] = (char)(seed >> 17);
        }
        rt_error err;
        rt_timeline *tl = rt_test_timeline();
        rt_status st = rt_timeline_load_xml_memory(tl, buf, len, "mutant", &err);
        if (st != RT_OK) {
            assert_int_equal(st, RT_ERR_STAGING);
            assert_true(strncmp(err.message, "mutant", 6) == 0);
        }
        rt_timeline_free(tl);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(example_loads),
        cmocka_unit_test(invalid_files),
        cmocka_unit_test(hostile_documents_refused),
        cmocka_unit_test(size_limit),
        cmocka_unit_test(write_read_back),
        cmocka_unit_test(mutated_example_never_crashes),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
