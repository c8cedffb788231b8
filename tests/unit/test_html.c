/* The review page: well-formed, self-contained, and safe with hostile input.
 *
 * A small EDF+ is written here with EDFlib whose patient field, recording
 * field, chin label and annotations hold markup and script text. The page is
 * read back with libxml2's XML parser (the page is written as XHTML, so a
 * well-formed XML parse is the check of W3C XML 1.0 well-formedness) and
 * searched with XPath: untrusted text must arrive as text, never as an
 * element; identity must stay out unless asked for. */
#include "support.h"

#include <edflib.h>
#include <libxml/parser.h>
#include <libxml/xpath.h>
#include <libxml/xpathInternals.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/remtone.h"
#include "report/svg.h"

#define RATE 256
#define EPOCHS 40               /* 10 N2, 20 R, 10 N2 */
#define REM_FIRST 10
#define REM_LAST 29
#define PATIENT "<script>alert(1)</script>"
#define RECORDING_TEXT "<img src=x onerror=alert(3)> & co"
#define CHIN_LABEL "<b>Chin</b>"
#define NOTE "<script>alert(2)</script>"

/* Gaussian noise from a fixed LCG and Box-Muller: the test needs EMG-like
 * noise, not a particular sequence. */
static double gauss(uint64_t *s)
{
    *s = *s * 6364136223846793005ULL + 1442695040888963407ULL;
    double u1 = ((double)(*s >> 11) + 0.5) / 9007199254740992.0;
    *s = *s * 6364136223846793005ULL + 1442695040888963407ULL;
    double u2 = ((double)(*s >> 11) + 0.5) / 9007199254740992.0;
    return sqrt(-2.0 * log(u1)) * cos(2.0 * 3.14159265358979323846 * u2);
}

/* Chin and both arms; in REM a 0.5-s burst of 40 uV every 3 s on every
 * channel, so the night is active and has evidence epochs. */
static void write_hostile_edf(const char *path, uint64_t seed)
{
    static const char *const LABELS[3] = {CHIN_LABEL, "FDS L", "FDS R"};
    int h = edfopen_file_writeonly(path, EDFLIB_FILETYPE_EDFPLUS, 3);
    assert_true(h >= 0);
    for (int c = 0; c < 3; c++) {
        assert_int_equal(edf_set_samplefrequency(h, c, RATE), 0);
        assert_int_equal(edf_set_physical_maximum(h, c, 500.0), 0);
        assert_int_equal(edf_set_physical_minimum(h, c, -500.0), 0);
        assert_int_equal(edf_set_digital_maximum(h, c, 32767), 0);
        assert_int_equal(edf_set_digital_minimum(h, c, -32768), 0);
        assert_int_equal(edf_set_label(h, c, LABELS[c]), 0);
        assert_int_equal(edf_set_physical_dimension(h, c, "uV"), 0);
    }
    assert_int_equal(edf_set_startdatetime(h, 2024, 3, 9, 23, 15, 0), 0);
    assert_int_equal(edf_set_patientname(h, PATIENT), 0);
    assert_int_equal(edf_set_recording_additional(h, RECORDING_TEXT), 0);
    assert_int_equal(edfwrite_annotation_utf8(h, REM_FIRST * 30 * 10000LL, 600 * 10000LL, NOTE), 0);
    double buf[RATE];
    for (int s = 0; s < EPOCHS * 30; s++) {
        bool rem = s >= REM_FIRST * 30 && s < (REM_LAST + 1) * 30;
        for (int c = 0; c < 3; c++) {
            for (int i = 0; i < RATE; i++) {
                bool burst = rem && s % 3 == c && i < RATE / 2;
                buf[i] = (burst ? 40.0 : 2.0) * gauss(&seed);
            }
            assert_int_equal(edfwrite_physical_samples(h, buf), 0);
        }
    }
    assert_int_equal(edfclose_file(h), 0);
}

typedef struct fixture {
    char dir[4096];
    rt_recording *rec;
    rt_timeline *tl;
    rt_night *night;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    snprintf(f->dir, sizeof f->dir, "%s", rt_test_dir("html_report"));
    char path[4200];
    snprintf(path, sizeof path, "%s/hostile.edf", f->dir);
    write_hostile_edf(path, rt_test_seed());
    rt_error err;
    if (rt_recording_open(path, &f->rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    rt_role_options ro;
    memset(&ro, 0, sizeof ro);
    ro.override[RT_ROLE_CHIN] = CHIN_LABEL;
    rt_role_map roles;
    if (rt_roles_resolve(f->rec, &ro, &roles, &err) != RT_OK)
        fail_msg("%s", err.message);
    f->tl = rt_test_timeline();
    assert_int_equal(rt_timeline_add_stage_run(f->tl, 0, REM_FIRST * 30.0, RT_STAGE_N2, "t", 0, &err), RT_OK);
    assert_int_equal(rt_timeline_add_stage_run(f->tl, REM_FIRST * 30.0, (REM_LAST - REM_FIRST + 1) * 30.0,
                                               RT_STAGE_R, "t", 0, &err), RT_OK);
    assert_int_equal(rt_timeline_add_stage_run(f->tl, (REM_LAST + 1) * 30.0,
                                               (EPOCHS - REM_LAST - 1) * 30.0, RT_STAGE_N2, "t", 0,
                                               &err), RT_OK);
    if (rt_night_score(f->rec, &roles, f->tl, NULL, NULL, &f->night, &err) != RT_OK)
        fail_msg("%s", err.message);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    rt_night_free(f->night);
    rt_timeline_free(f->tl);
    rt_recording_close(f->rec);
    free(f);
    return 0;
}

static const char *write_page(fixture *f, const char *name, const rt_report_options *o)
{
    static char path[4200];
    snprintf(path, sizeof path, "%s/%s", f->dir, name);
    rt_error err;
    if (rt_night_write_html(f->night, f->rec, f->tl, o, path, &err) != RT_OK)
        fail_msg("%s", err.message);
    return path;
}

static char *slurp(const char *path)
{
    FILE *in = fopen(path, "rb");
    assert_non_null(in);
    fseek(in, 0, SEEK_END);
    long n = ftell(in);
    fseek(in, 0, SEEK_SET);
    char *s = calloc((size_t)n + 1, 1);
    assert_int_equal(fread(s, 1, (size_t)n, in), (size_t)n);
    fclose(in);
    return s;
}

static double xpath_count(xmlDocPtr doc, const char *expr)
{
    xmlXPathContextPtr ctx = xmlXPathNewContext(doc);
    xmlXPathRegisterNs(ctx, BAD_CAST "h", BAD_CAST "http://www.w3.org/1999/xhtml");
    xmlXPathRegisterNs(ctx, BAD_CAST "s", BAD_CAST "http://www.w3.org/2000/svg");
    xmlXPathObjectPtr r = xmlXPathEvalExpression(BAD_CAST expr, ctx);
    assert_non_null(r);
    double n = r->type == XPATH_NUMBER ? r->floatval : NAN;
    xmlXPathFreeObject(r);
    xmlXPathFreeContext(ctx);
    return n;
}

/* The visible text of the whole document (all text nodes, entities decoded). */
static char *document_text(xmlDocPtr doc)
{
    return (char *)xmlNodeGetContent(xmlDocGetRootElement(doc));
}

static void page_is_wellformed_with_plots(void **state)
{
    fixture *f = *state;
    const char *path = write_page(f, "plain.html", NULL);
    /* XML 1.0 well-formedness (W3C); XML_PARSE_NONET: nothing may be fetched */
    xmlDocPtr doc = xmlReadFile(path, NULL, XML_PARSE_NONET | XML_PARSE_NOERROR);
    assert_non_null(doc);
    /* one SVG each: the night, the indices, the bouts, and one per evidence
     * epoch (this night has at least 4 active epochs) */
    assert_true(xpath_count(doc, "count(//s:svg)") >= 7);
    assert_true(xpath_count(doc, "count(//s:svg//s:polyline)") >= 4);
    assert_true(xpath_count(doc, "count(//s:svg//s:rect)") >= 3 * 20);
    assert_true(xpath_count(doc, "count(//s:svg//s:line)") >= RT_IX_COUNT);
    /* one bar label per index (docs/review-report.md) */
    const rt_index_rule *rules = rt_index_rules();
    for (int i = 0; i < RT_IX_COUNT; i++) {
        char expr[200];
        snprintf(expr, sizeof expr, "count(//s:text[normalize-space(.)='%s'])", rules[i].id);
        assert_true(xpath_count(doc, expr) >= 1);
    }
    /* self-contained: no scripts, no external references of any kind */
    assert_int_equal((int)xpath_count(doc, "count(//*[local-name()='script'])"), 0);
    assert_int_equal((int)xpath_count(doc, "count(//@src | //h:link | //@*[local-name()='href' and not(starts-with(., '#'))])"), 0);
    /* print rules present: navigation hidden, no forced break per section
     * (docs/review-report.md, "Printing"; the page count is
     * tests/ref/test_print_pages.py's) */
    char *raw = slurp(path);
    assert_non_null(strstr(raw, "nav{display:none}"));
    assert_non_null(strstr(raw, "h2,h3{break-after:avoid"));
    assert_non_null(strstr(raw, "tr,li,svg,.keep,.verdict,.sentence,.facts{break-inside:avoid"));
    assert_null(strstr(raw, "page-break-before:always"));
    free(raw);
    /* every caution of SAFETY.md, word for word, and the visual-scoring note */
    char *text = document_text(doc);
    for (size_t i = 0; i < rt_caution_count(); i++)
        assert_non_null(strstr(text, rt_caution(i)));
    assert_non_null(strstr(text, rt_visual_scoring_note()));
    xmlFree(text);
    xmlFreeDoc(doc);
}

static void identity_hidden_by_default(void **state)
{
    fixture *f = *state;
    const char *path = write_page(f, "deidentified.html", NULL);
    char *raw = slurp(path);
    /* neither the patient field nor the recording field, raw or escaped, nor
     * the start date */
    assert_null(strstr(raw, "alert(1)"));
    assert_null(strstr(raw, "alert(3)"));
    assert_null(strstr(raw, "2024-03-09"));
    /* the file name stands in for the identity */
    assert_non_null(strstr(raw, "hostile.edf"));
    free(raw);

    rt_report_options o = {.show_identity = false, .recording_id = "study-0042"};
    path = write_page(f, "named.html", &o);
    raw = slurp(path);
    assert_non_null(strstr(raw, "study-0042"));
    assert_null(strstr(raw, "hostile.edf"));
    assert_null(strstr(raw, "alert(1)"));
    free(raw);
}

static void hostile_text_stays_text(void **state)
{
    fixture *f = *state;
    rt_report_options o = {.show_identity = true, .recording_id = NULL};
    const char *path = write_page(f, "identity.html", &o);
    xmlDocPtr doc = xmlReadFile(path, NULL, XML_PARSE_NONET | XML_PARSE_NOERROR);
    assert_non_null(doc);
    /* no element was injected: not script, img or b */
    assert_int_equal((int)xpath_count(doc, "count(//*[local-name()='script'])"), 0);
    assert_int_equal((int)xpath_count(doc, "count(//*[local-name()='img'])"), 0);
    assert_int_equal((int)xpath_count(doc, "count(//*[local-name()='b'])"), 0);
    assert_int_equal((int)xpath_count(doc, "count(//@onerror)"), 0);
    char *text = document_text(doc);
    /* shown as the characters they are. EDFlib writes the EDF+ patient name
     * subfield with spaces as '_' (EDF+ spec section 2.1.3.3), which this
     * text has none of */
    assert_non_null(strstr(text, PATIENT));
    assert_non_null(strstr(text, "alert(3)"));
    assert_non_null(strstr(text, CHIN_LABEL));
    assert_non_null(strstr(text, NOTE));
    assert_non_null(strstr(text, "2024-03-09"));
    xmlFree(text);
    xmlFreeDoc(doc);
    char *raw = slurp(path);
    assert_null(strstr(raw, "<script"));
    assert_non_null(strstr(raw, "&lt;script&gt;alert(1)"));
    free(raw);
}

/* Well-formed UTF-8 (Unicode Standard, chapter 3, table 3-7) and the XML 1.0
 * Char production: invalid bytes, overlong forms and surrogates become
 * U+FFFD, C0 controls other than tab and newline become spaces. */
static void untrusted_bytes_become_valid_utf8(void **state)
{
    (void)state;
    static const struct { const char *in, *out; } CASES[] = {
        {"caf\xc3\xa9", "caf\xc3\xa9"},                  /* valid 2-byte */
        {"caf\xe9", "caf\xef\xbf\xbd"},                  /* Latin-1 byte */
        {"a\x01" "b\tc\nd", "a b\tc\nd"},                /* controls */
        {"\xc0\xaf", "\xef\xbf\xbd\xef\xbf\xbd"},        /* overlong '/' */
        {"\xed\xa0\x80", "\xef\xbf\xbd\xef\xbf\xbd\xef\xbf\xbd"}, /* surrogate D800 */
        {"\xf0\x9f\x98\x80", "\xf0\x9f\x98\x80"},        /* U+1F600 */
        {"\xef\xbf\xbe", "\xef\xbf\xbd"},                /* U+FFFE, not an XML Char */
        {"\xe2\x82", "\xef\xbf\xbd\xef\xbf\xbd"},        /* truncated */
    };
    for (size_t i = 0; i < sizeof CASES / sizeof CASES[0]; i++) {
        char *got = NULL;
        assert_int_equal(rt_xml_clean_text(CASES[i].in, &got, NULL), RT_OK);
        assert_non_null(got);
        assert_string_equal(got, CASES[i].out);
        assert_true(xmlCheckUTF8((const unsigned char *)got));
        free(got);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(page_is_wellformed_with_plots),
        cmocka_unit_test(identity_hidden_by_default),
        cmocka_unit_test(hostile_text_stays_text),
        cmocka_unit_test(untrusted_bytes_become_valid_utf8),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
