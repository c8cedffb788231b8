/* remtone XML scoring files (docs/scoring-file.md): reading, with libxml2
 * from memory and validation against the schema compiled into the library,
 * and writing, with libxml2's text writer. A scoring file comes from outside,
 * so the reader trusts nothing: the file is read whole under a size limit,
 * any document type declaration is refused before its contents are looked
 * at (no entity is ever expanded, no external file or URL ever opened), all
 * libxml2 diagnostics go to per-call collectors rather than libxml2's global
 * handlers (which would print), and the validated tree is turned into a
 * timeline through the same checked calls every other loader uses
 * (timeline.c). */
#include <errno.h>
#include <math.h>
#include <pthread.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <libxml/parser.h>
#include <libxml/parserInternals.h>
#include <libxml/tree.h>
#include <libxml/xmlerror.h>
#include <libxml/xmlschemas.h>
#include <libxml/xmlwriter.h>

#include "input.h"
#include "internal.h"
#include "output.h"
#include "remtone/corrections.h"
#include "remtone/roles.h"
#include "remtone/timeline.h"
#include "remtone_scoring_xsd.h"

/* A scoring file of a long night with every mini-epoch scored on six roles is
 * a few MiB; 64 MiB is the stage table's limit too, and stops a wrong path to
 * a recording from being parsed as text. */
#define MAX_XML_BYTES RT_INPUT_TEXT_MAX_BYTES

/* ---- libxml2 plumbing --------------------------------------------------- */

static pthread_once_t libxml_once = PTHREAD_ONCE_INIT;

/* xmlInitParser is not safe to race in libxml2 2.9: run it once. */
static void libxml_init(void)
{
    xmlInitParser();
}

/* Diagnostics of one parse or validation: the first error in full (it is
 * the cause; later ones are usually its echoes) and how many followed. */
typedef struct xml_diag {
    long line;
    char message[400];
    int count;
    bool has_doctype;
    long doctype_line;
} xml_diag;

static void diag_record(xml_diag *d, const xmlError *e)
{
    if (!e || e->level == XML_ERR_WARNING)
        return;
    if (d->count++ > 0)
        return;
    d->line = e->line;
    rt_copy_string(d->message, sizeof d->message, e->message ? e->message : "unknown error");
    rt_trim(d->message);
}

/* Parser errors arrive with the parser context as user data (libxml2 passes
 * ctxt->userData, which is the context itself); the collector hangs on
 * ctxt->_private. */
static void on_parse_error(void *user, xmlErrorPtr e)
{
    xmlParserCtxtPtr ctxt = user;
    if (ctxt && ctxt->_private)
        diag_record(ctxt->_private, e);
}

static void on_schema_error(void *user, xmlErrorPtr e)
{
    diag_record(user, e);
}

/* A few libxml2 diagnostics (encoding conversion, text-writer failures)
 * name no parser context and would go to libxml2's default handler, which
 * prints. During each call the calling thread's handler (libxml2 keeps it
 * per thread) is pointed at the call's own collector, then restored. */
typedef struct saved_handler {
    xmlStructuredErrorFunc handler;
    void *context;
} saved_handler;

static void divert_errors(saved_handler *saved, xml_diag *diag)
{
    saved->handler = xmlStructuredError;
    saved->context = xmlStructuredErrorContext;
    xmlSetStructuredErrorFunc(diag, on_schema_error);
}

static void restore_errors(const saved_handler *saved)
{
    xmlSetStructuredErrorFunc(saved->context, saved->handler);
}

/* Called as soon as `<!DOCTYPE name` has been read, before any declaration
 * inside it: the parse stops here, so internal entities (the "billion
 * laughs") are never declared and external ones never fetched. */
static void on_doctype(void *user, const xmlChar *name, const xmlChar *external_id,
                       const xmlChar *system_id)
{
    (void)name;
    (void)external_id;
    (void)system_id;
    xmlParserCtxtPtr ctxt = user;
    xml_diag *d = ctxt->_private;
    d->has_doctype = true;
    d->doctype_line = xmlSAX2GetLineNumber(ctxt);
    xmlStopParser(ctxt);
}

/* Belt and braces: without a DTD there are no declarations, but should
 * libxml2 ever reach one, refuse it the same way. */
static void on_entity_decl(void *user, const xmlChar *name, int type, const xmlChar *public_id,
                           const xmlChar *system_id, xmlChar *content)
{
    (void)name;
    (void)type;
    (void)public_id;
    (void)system_id;
    (void)content;
    on_doctype(user, NULL, NULL, NULL);
}

static rt_status parse_document(const char *data, size_t len, const char *name, xmlDocPtr *out,
                                rt_error *err)
{
    *out = NULL;
    if (len > (size_t)MAX_XML_BYTES)
        return rt_fail(err, RT_ERR_STAGING, "%s: larger than %lld MiB, not a scoring file", name,
                       MAX_XML_BYTES / (1024 * 1024));
    xmlParserCtxtPtr ctxt = xmlNewParserCtxt();
    if (!ctxt)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for the XML parser", name);
    xml_diag diag;
    memset(&diag, 0, sizeof diag);
    ctxt->_private = &diag;
    ctxt->sax->serror = on_parse_error;
    ctxt->sax->internalSubset = on_doctype;
    ctxt->sax->externalSubset = on_doctype;
    ctxt->sax->entityDecl = on_entity_decl;
    /* No XML_PARSE_NOENT (entities stay unexpanded), no XML_PARSE_DTDLOAD,
     * no XML_PARSE_HUGE (libxml2's default limits on depth and text hold);
     * BIG_LINES so line numbers past 65535 are right in messages. */
    int options = XML_PARSE_NONET | XML_PARSE_BIG_LINES | XML_PARSE_NOCDATA;
    saved_handler saved;
    divert_errors(&saved, &diag);
    xmlDocPtr doc = xmlCtxtReadMemory(ctxt, data, (int)len, NULL, NULL, options);
    restore_errors(&saved);
    bool well_formed = ctxt->wellFormed != 0;
    xmlFreeParserCtxt(ctxt);
    if (diag.has_doctype) {
        xmlFreeDoc(doc);
        return rt_fail(err, RT_ERR_STAGING,
                       "%s line %ld: refused: the document has a document type declaration "
                       "(<!DOCTYPE>); remtone scoring files must not have one, so that no entity "
                       "is expanded and no outside file is read",
                       name, diag.doctype_line);
    }
    if (!doc || !well_formed || diag.count > 0) {
        xmlFreeDoc(doc);
        if (diag.count == 0)
            return rt_fail(err, RT_ERR_STAGING, "%s: not a well-formed XML document", name);
        return rt_fail(err, RT_ERR_STAGING, "%s line %ld: not well-formed XML: %s%s", name,
                       diag.line, diag.message, diag.count > 1 ? " (and further errors)" : "");
    }
    *out = doc;
    return RT_OK;
}

static rt_status validate_quietly(xmlDocPtr doc, const char *name, rt_error *err)
{
    xml_diag diag;
    memset(&diag, 0, sizeof diag);
    rt_status st = RT_OK;
    xmlSchemaParserCtxtPtr pctxt =
        xmlSchemaNewMemParserCtxt((const char *)remtone_scoring_xsd, (int)sizeof remtone_scoring_xsd);
    if (!pctxt)
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for the schema", name);
    xmlSchemaSetParserStructuredErrors(pctxt, on_schema_error, &diag);
    xmlSchemaPtr schema = xmlSchemaParse(pctxt);
    xmlSchemaFreeParserCtxt(pctxt);
    if (!schema)
        return rt_fail(err, RT_ERR_INTERNAL, "the compiled-in scoring schema does not load: %s",
                       diag.count ? diag.message : "unknown error");
    xmlSchemaValidCtxtPtr vctxt = xmlSchemaNewValidCtxt(schema);
    if (!vctxt) {
        xmlSchemaFree(schema);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for validation", name);
    }
    memset(&diag, 0, sizeof diag);
    xmlSchemaSetValidStructuredErrors(vctxt, on_schema_error, &diag);
    int rc = xmlSchemaValidateDoc(vctxt, doc);
    xmlSchemaFreeValidCtxt(vctxt);
    xmlSchemaFree(schema);
    if (rc != 0) {
        if (diag.count == 0)
            st = rt_fail(err, RT_ERR_STAGING,
                         "%s: does not follow the remtone scoring schema (docs/scoring-file.md)",
                         name);
        else
            st = rt_fail(err, RT_ERR_STAGING,
                         "%s line %ld: does not follow the remtone scoring schema "
                         "(docs/scoring-file.md): %s%s",
                         name, diag.line, diag.message,
                         diag.count > 1 ? " (and further errors)" : "");
    }
    return st;
}

static rt_status validate_document(xmlDocPtr doc, const char *name, rt_error *err)
{
    /* Schema diagnostics come through the two callbacks set below; anything
     * libxml2 raises without a context lands in `stray` instead of stderr. */
    xml_diag stray;
    memset(&stray, 0, sizeof stray);
    saved_handler saved;
    divert_errors(&saved, &stray);
    rt_status st = validate_quietly(doc, name, err);
    restore_errors(&saved);
    return st;
}

/* ---- From the validated tree to a timeline ------------------------------ */

typedef struct reader {
    const char *name;   /* file name for messages */
    rt_timeline *tl;    /* scratch timeline */
    rt_error *err;
} reader;

static bool is_element(xmlNodePtr n, const char *name)
{
    return n->type == XML_ELEMENT_NODE && xmlStrcmp(n->name, BAD_CAST name) == 0;
}

/* Copies attribute `attr` of n into buf (trimmed); false when absent. */
static bool attr_text(xmlNodePtr n, const char *attr, char *buf, size_t cap)
{
    xmlChar *v = xmlGetProp(n, BAD_CAST attr);
    if (!v)
        return false;
    rt_copy_string(buf, cap, (const char *)v);
    xmlFree(v);
    rt_trim(buf);
    return true;
}

/* The schema has already checked every number's form; this still refuses
 * anything unparsable rather than trust it. */
static rt_status attr_number(reader *r, xmlNodePtr n, const char *attr, bool required,
                             double *out, bool *given)
{
    char buf[128];
    if (given)
        *given = false;
    if (!attr_text(n, attr, buf, sizeof buf)) {
        if (!required)
            return RT_OK;
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: <%s> lacks the attribute %s",
                       r->name, xmlGetLineNo(n), (const char *)n->name, attr);
    }
    if (rt_parse_double(buf, out) != 0)
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: %s=\"%s\" is not a number", r->name,
                       xmlGetLineNo(n), attr, buf);
    if (given)
        *given = true;
    return RT_OK;
}

static rt_status attr_role(reader *r, xmlNodePtr n, const char *attr, bool required, int *role)
{
    char buf[64];
    *role = -1;
    if (!attr_text(n, attr, buf, sizeof buf)) {
        if (!required)
            return RT_OK;
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: <%s> lacks the attribute %s",
                       r->name, xmlGetLineNo(n), (const char *)n->name, attr);
    }
    rt_role v = rt_role_from_name(buf);
    if (v == RT_ROLE_NONE)
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: %s=\"%s\" is not a channel role",
                       r->name, xmlGetLineNo(n), attr, buf);
    *role = (int)v;
    return RT_OK;
}

static bool stage_from_name(const char *s, rt_stage *stage)
{
    for (int i = 0; i < RT_STAGE_COUNT; i++)
        if (strcmp(s, rt_stage_name((rt_stage)i)) == 0) {
            *stage = (rt_stage)i;
            return true;
        }
    return false;
}

static rt_status read_scored_by(reader *r, xmlNodePtr n)
{
    char date[64];
    if (attr_text(n, "name", r->tl->scorer, sizeof r->tl->scorer) && attr_text(n, "date", date,
                                                                                sizeof date)) {
        if (strlen(date) >= sizeof r->tl->scored_on)
            return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: date \"%s\" is longer than %zu "
                           "characters", r->name, xmlGetLineNo(n), date,
                           sizeof r->tl->scored_on - 1);
        rt_copy_string(r->tl->scored_on, sizeof r->tl->scored_on, date);
    }
    return RT_OK;
}

static rt_status read_lights(reader *r, xmlNodePtr n)
{
    double off_s = 0.0, on_s = -1.0;
    bool has_off = false, has_on = false;
    rt_status st = attr_number(r, n, "off-s", false, &off_s, &has_off);
    if (st == RT_OK)
        st = attr_number(r, n, "on-s", false, &on_s, &has_on);
    if (st != RT_OK)
        return st;
    if (has_off && has_on && !(off_s < on_s))
        return rt_fail(r->err, RT_ERR_STAGING,
                       "%s line %ld: lights on (%.10g s) is not after lights off (%.10g s)",
                       r->name, xmlGetLineNo(n), on_s, off_s);
    if (has_off)
        r->tl->lights_off_s = off_s;
    if (has_on)
        r->tl->lights_on_s = on_s;
    return RT_OK;
}

static rt_status read_run(reader *r, xmlNodePtr n)
{
    double start_epoch = 0.0, epochs = 0.0;
    char label[16];
    rt_status st = attr_number(r, n, "start-epoch", true, &start_epoch, NULL);
    if (st == RT_OK)
        st = attr_number(r, n, "epochs", true, &epochs, NULL);
    if (st != RT_OK)
        return st;
    rt_stage stage;
    if (!attr_text(n, "stage", label, sizeof label) || !stage_from_name(label, &stage))
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: stage \"%s\" is not W, N1, N2, N3, "
                       "R, MT or ?", r->name, xmlGetLineNo(n), label);
    const double ep = r->tl->epoch_s;
    return rt_timeline_add_stage_run(r->tl, start_epoch * ep, epochs * ep, stage, r->name,
                                     xmlGetLineNo(n), r->err);
}

/* <epochs start-epoch="k">W W N1 ...</epochs>: one stage per epoch; equal
 * neighbours are added as one run. */
static rt_status read_epoch_list(reader *r, xmlNodePtr n)
{
    double start_epoch = 0.0;
    rt_status st = attr_number(r, n, "start-epoch", true, &start_epoch, NULL);
    if (st != RT_OK)
        return st;
    xmlChar *text = xmlNodeGetContent(n);
    if (!text)
        return rt_fail(r->err, RT_ERR_NOMEM, "%s: out of memory", r->name);
    const double ep = r->tl->epoch_s;
    long line = xmlGetLineNo(n);
    double at = start_epoch;
    rt_stage run_stage = RT_STAGE_UNSCORED;
    double run_start = at, run_len = 0.0;
    char *save = NULL;
    for (char *tok = strtok_r((char *)text, " \t\r\n", &save); tok && st == RT_OK;
         tok = strtok_r(NULL, " \t\r\n", &save)) {
        rt_stage stage;
        if (!stage_from_name(tok, &stage)) {
            st = rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: stage \"%s\" is not W, N1, N2, "
                         "N3, R, MT or ?", r->name, line, tok);
            break;
        }
        if (run_len > 0.0 && stage != run_stage) {
            st = rt_timeline_add_stage_run(r->tl, run_start * ep, run_len * ep, run_stage,
                                           r->name, line, r->err);
            run_len = 0.0;
        }
        if (run_len == 0.0) {
            run_stage = stage;
            run_start = at;
        }
        run_len += 1.0;
        at += 1.0;
    }
    if (st == RT_OK && run_len > 0.0)
        st = rt_timeline_add_stage_run(r->tl, run_start * ep, run_len * ep, run_stage, r->name,
                                       line, r->err);
    else if (st == RT_OK)
        st = rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: <epochs> lists no stage", r->name,
                     line);
    xmlFree(text);
    return st;
}

static rt_status read_event(reader *r, xmlNodePtr n)
{
    double onset_s = 0.0, duration_s = 0.0;
    char label[32];
    int role = -1;
    rt_status st = attr_number(r, n, "onset-s", true, &onset_s, NULL);
    if (st == RT_OK)
        st = attr_number(r, n, "duration-s", true, &duration_s, NULL);
    if (st == RT_OK)
        st = attr_role(r, n, "channel", false, &role);
    if (st != RT_OK)
        return st;
    rt_event_type type = RT_EVENT_AROUSAL;
    bool known = false;
    if (attr_text(n, "type", label, sizeof label))
        for (int i = 0; i < RT_EVENT_TYPE_COUNT && !known; i++)
            if (strcmp(label, rt_event_type_name((rt_event_type)i)) == 0) {
                type = (rt_event_type)i;
                known = true;
            }
    if (!known)
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: unknown event type \"%s\"", r->name,
                       xmlGetLineNo(n), label);
    return rt_timeline_add_event_role(r->tl, onset_s, duration_s, type, role, r->name,
                                      xmlGetLineNo(n), r->err);
}

static rt_status read_flag(reader *r, xmlNodePtr n, const char *attr, bool *flag)
{
    char buf[8];
    if (!attr_text(n, attr, buf, sizeof buf) || (strcmp(buf, "0") != 0 && strcmp(buf, "1") != 0))
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: %s must be 0 or 1", r->name,
                       xmlGetLineNo(n), attr);
    *flag = buf[0] == '1';
    return RT_OK;
}

static rt_status read_mini(reader *r, xmlNodePtr n)
{
    double onset_s = 0.0;
    int role = -1;
    bool phasic = false, tonic = false;
    rt_status st = attr_number(r, n, "onset-s", true, &onset_s, NULL);
    if (st == RT_OK)
        st = attr_role(r, n, "role", true, &role);
    if (st == RT_OK)
        st = read_flag(r, n, "phasic", &phasic);
    if (st == RT_OK)
        st = read_flag(r, n, "tonic", &tonic);
    if (st != RT_OK)
        return st;
    return rt_timeline_add_manual(r->tl, onset_s, role, phasic, tonic, r->name, xmlGetLineNo(n),
                                  r->err);
}

/* <minis onset-s= role= phasic="0100" tonic="0000"/>: consecutive 3-s minis
 * from onset-s, one character each. Minis run on across epoch boundaries
 * only when the epoch is a whole number of minis (it is for 30 s). */
static rt_status read_mini_string(reader *r, xmlNodePtr n)
{
    double onset_s = 0.0;
    int role = -1;
    rt_status st = attr_number(r, n, "onset-s", true, &onset_s, NULL);
    if (st == RT_OK)
        st = attr_role(r, n, "role", true, &role);
    if (st != RT_OK)
        return st;
    xmlChar *phasic = xmlGetProp(n, BAD_CAST "phasic");
    xmlChar *tonic = xmlGetProp(n, BAD_CAST "tonic");
    long line = xmlGetLineNo(n);
    if (!phasic || !tonic) {
        st = rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: <minis> needs phasic and tonic",
                     r->name, line);
    } else {
        size_t np = strlen((const char *)phasic), nt = strlen((const char *)tonic);
        if (np != nt)
            st = rt_fail(r->err, RT_ERR_STAGING,
                         "%s line %ld: phasic lists %zu mini-epochs but tonic lists %zu", r->name,
                         line, np, nt);
        for (size_t k = 0; st == RT_OK && k < np; k++) {
            char p = (char)phasic[k], t = (char)tonic[k];
            if ((p != '0' && p != '1') || (t != '0' && t != '1')) {
                st = rt_fail(r->err, RT_ERR_STAGING,
                             "%s line %ld: mini-epoch %zu is not marked 0 or 1", r->name, line,
                             k + 1);
                break;
            }
            st = rt_timeline_add_manual(r->tl, onset_s + (double)k * RT_MANUAL_MINI_S, role,
                                        p == '1', t == '1', r->name, line, r->err);
        }
    }
    xmlFree(phasic);
    xmlFree(tonic);
    return st;
}

static rt_status read_children(reader *r, xmlNodePtr parent)
{
    rt_status st = RT_OK;
    for (xmlNodePtr c = parent->children; c && st == RT_OK; c = c->next) {
        if (c->type != XML_ELEMENT_NODE)
            continue;
        if (is_element(c, "run"))
            st = read_run(r, c);
        else if (is_element(c, "epochs"))
            st = read_epoch_list(r, c);
        else if (is_element(c, "event"))
            st = read_event(r, c);
        else if (is_element(c, "mini"))
            st = read_mini(r, c);
        else if (is_element(c, "minis"))
            st = read_mini_string(r, c);
        else
            st = rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: unexpected element <%s>", r->name,
                         xmlGetLineNo(c), (const char *)c->name);
    }
    return st;
}

static rt_status read_root(reader *r, xmlNodePtr root)
{
    if (!root || !is_element(root, "remtone-scoring"))
        return rt_fail(r->err, RT_ERR_STAGING, "%s: the root element is not <remtone-scoring>",
                       r->name);
    double epoch_s = RT_EPOCH_S;
    bool given = false;
    rt_status st = attr_number(r, root, "epoch-s", false, &epoch_s, &given);
    if (st != RT_OK)
        return st;
    if (given) {
        if (!(epoch_s > 0.0) || epoch_s > 3600.0)
            return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: epoch-s %.10g is not in (0, 3600]",
                           r->name, xmlGetLineNo(root), epoch_s);
        r->tl->epoch_s = epoch_s;
    }
    bool have_stages = false;
    for (xmlNodePtr c = root->children; c && st == RT_OK; c = c->next) {
        if (c->type != XML_ELEMENT_NODE)
            continue;
        if (is_element(c, "scored-by"))
            st = read_scored_by(r, c);
        else if (is_element(c, "lights"))
            st = read_lights(r, c);
        else if (is_element(c, "stages")) {
            have_stages = true;
            st = read_children(r, c);
        } else if (is_element(c, "events") || is_element(c, "manual-rswa"))
            st = read_children(r, c);
        else if (is_element(c, "corrections"))
            continue; /* read by rt_corrections_load_xml, when asked for */
        else
            st = rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: unexpected element <%s>", r->name,
                         xmlGetLineNo(c), (const char *)c->name);
    }
    if (st == RT_OK && !have_stages)
        st = rt_fail(r->err, RT_ERR_STAGING, "%s: no <stages>", r->name);
    if (st == RT_OK && r->tl->n_epochs == 0)
        st = rt_fail(r->err, RT_ERR_STAGING, "%s: staging is empty: no epoch has a stage",
                     r->name);
    return st;
}

rt_status rt_timeline_load_xml_memory(rt_timeline *tl, const char *data, size_t len,
                                      const char *name, rt_error *err)
{
    if (!tl || (!data && len > 0))
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_load_xml_memory: NULL argument");
    if (!name)
        name = "scoring file";
    if (len == 0)
        return rt_fail(err, RT_ERR_STAGING, "%s: empty file", name);
    pthread_once(&libxml_once, libxml_init);
    xmlDocPtr doc = NULL;
    rt_status st = parse_document(data, len, name, &doc, err);
    if (st != RT_OK)
        return st;
    st = validate_document(doc, name, err);
    rt_timeline *scratch = NULL;
    if (st == RT_OK)
        st = rt_timeline_new(&scratch, err);
    if (st == RT_OK) {
        reader r = {name, scratch, err};
        st = read_root(&r, xmlDocGetRootElement(doc));
    }
    if (st == RT_OK)
        st = rt_timeline_merge(tl, scratch, err);
    rt_timeline_free(scratch);
    xmlFreeDoc(doc);
    return st;
}

/* The whole file at path into *buf (the caller frees it), at most
 * MAX_XML_BYTES. */
static rt_status read_whole(const char *path, char **buf_out, size_t *len_out, rt_error *err)
{
    /* read whole by the one reader of text inputs: a regular file of at most
     * MAX_XML_BYTES, not empty, not UTF-16 or UTF-32 */
    unsigned char *buf = NULL;
    rt_status st = rt_input_read_text(path, "scoring file", &buf, len_out, err);
    *buf_out = (char *)buf;
    return st;
}

rt_status rt_timeline_load_xml(rt_timeline *tl, const char *path, rt_error *err)
{
    if (!tl || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_load_xml: NULL argument");
    char *buf = NULL;
    size_t len = 0;
    rt_status st = read_whole(path, &buf, &len, err);
    if (st == RT_OK)
        st = rt_timeline_load_xml_memory(tl, buf, len, path, err);
    free(buf);
    return st;
}

/* ---- Corrections (docs/corrections.md) ----------------------------------- */

static rt_status read_decision(reader *r, rt_corrections *c, xmlNodePtr n)
{
    rt_decision d;
    memset(&d, 0, sizeof d);
    d.place = xmlGetLineNo(n);
    char word[32];
    attr_text(n, "kind", word, sizeof word);
    d.kind = strcmp(word, "confirm") == 0   ? RT_DECISION_CONFIRM
             : strcmp(word, "reject") == 0  ? RT_DECISION_REJECT
             : strcmp(word, "add") == 0     ? RT_DECISION_ADD
             : strcmp(word, "exclude") == 0 ? RT_DECISION_EXCLUDE
                                            : RT_DECISION_KINDS;
    d.activity = RT_ACTIVITY_ANY;
    if (attr_text(n, "activity", word, sizeof word))
        d.activity = strcmp(word, "tonic") == 0 ? RT_ACTIVITY_TONIC : RT_ACTIVITY_PHASIC;
    if (attr_text(n, "reason", word, sizeof word) && !rt_decision_reason_parse(word, &d.reason))
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: unknown reason \"%s\"", r->name,
                       d.place, word);
    bool given = false;
    rt_status st = attr_role(r, n, "role", false, &d.role);
    if (st == RT_OK)
        st = attr_number(r, n, "onset-s", true, &d.start_s, NULL);
    if (st == RT_OK)
        st = attr_number(r, n, "end-s", false, &d.end_s, &given);
    if (st != RT_OK)
        return st;
    if (given != (d.kind == RT_DECISION_EXCLUDE))
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: end-s belongs to exclude, and only "
                       "to it", r->name, d.place);
    if (d.kind == RT_DECISION_EXCLUDE && d.role >= 0)
        return rt_fail(r->err, RT_ERR_STAGING, "%s line %ld: an exclusion covers every channel; "
                       "it takes no role", r->name, d.place);
    attr_text(n, "reviewer", d.reviewer, sizeof d.reviewer);
    attr_text(n, "at", d.decided_at, sizeof d.decided_at);
    return rt_corrections_add(c, &d, r->err);
}

rt_status rt_corrections_load_xml(rt_corrections *c, rt_error *err)
{
    if (!c)
        return rt_fail(err, RT_ERR_USAGE, "rt_corrections_load_xml: NULL argument");
    char *buf = NULL;
    size_t len = 0;
    rt_status st = read_whole(c->path, &buf, &len, err);
    if (st != RT_OK)
        return st;
    pthread_once(&libxml_once, libxml_init);
    xmlDocPtr doc = NULL;
    if (len == 0)
        st = rt_fail(err, RT_ERR_STAGING, "%s: empty file", c->path);
    if (st == RT_OK)
        st = parse_document(buf, len, c->path, &doc, err);
    free(buf);
    if (st == RT_OK)
        st = validate_document(doc, c->path, err);
    xmlNodePtr root = st == RT_OK ? xmlDocGetRootElement(doc) : NULL;
    reader r = {c->path, NULL, err};
    for (xmlNodePtr e = root ? root->children : NULL; e && st == RT_OK; e = e->next) {
        if (!is_element(e, "corrections"))
            continue;
        for (xmlNodePtr d = e->children; d && st == RT_OK; d = d->next)
            if (is_element(d, "decision"))
                st = read_decision(&r, c, d);
    }
    xmlFreeDoc(doc);
    return st;
}

/* ---- Writing ------------------------------------------------------------ */

/* The shortest plain decimal (no exponent: xs:decimal has none) that reads
 * back as exactly v. */
static void format_decimal(double v, char *buf, size_t cap)
{
    for (int prec = 0; prec <= 17; prec++) {
        snprintf(buf, cap, "%.*f", prec, v);
        if (strtod(buf, NULL) == v)
            return;
    }
}

typedef struct writer {
    xmlTextWriterPtr w;
    int bad;
} writer;

static void w_start(writer *wr, const char *name)
{
    if (xmlTextWriterStartElement(wr->w, BAD_CAST name) < 0)
        wr->bad = 1;
}

static void w_end(writer *wr)
{
    if (xmlTextWriterEndElement(wr->w) < 0)
        wr->bad = 1;
}

static void w_attr(writer *wr, const char *name, const char *value)
{
    if (xmlTextWriterWriteAttribute(wr->w, BAD_CAST name, BAD_CAST value) < 0)
        wr->bad = 1;
}

static void w_attr_number(writer *wr, const char *name, double v)
{
    char buf[64];
    format_decimal(v, buf, sizeof buf);
    w_attr(wr, name, buf);
}

static void w_attr_count(writer *wr, const char *name, size_t v)
{
    char buf[32];
    snprintf(buf, sizeof buf, "%zu", v);
    w_attr(wr, name, buf);
}

static void write_body(writer *wr, const rt_timeline *tl)
{
    w_start(wr, "remtone-scoring");
    w_attr(wr, "version", "1");
    w_attr_number(wr, "epoch-s", tl->epoch_s);
    if (tl->scorer[0]) {
        w_start(wr, "scored-by");
        w_attr(wr, "name", tl->scorer);
        if (tl->scored_on[0])
            w_attr(wr, "date", tl->scored_on);
        w_end(wr);
    }
    if (tl->lights_off_s > 0.0 || tl->lights_on_s >= 0.0) {
        w_start(wr, "lights");
        if (tl->lights_off_s > 0.0)
            w_attr_number(wr, "off-s", tl->lights_off_s);
        if (tl->lights_on_s >= 0.0)
            w_attr_number(wr, "on-s", tl->lights_on_s);
        w_end(wr);
    }
    w_start(wr, "stages");
    for (size_t e = 0; e < tl->n_epochs;) {
        size_t end = e;
        while (end < tl->n_epochs && tl->stages[end] == tl->stages[e])
            end++;
        if (tl->stages[e] != RT_STAGE_UNSCORED) {
            w_start(wr, "run");
            w_attr_count(wr, "start-epoch", e);
            w_attr_count(wr, "epochs", end - e);
            w_attr(wr, "stage", rt_stage_name((rt_stage)tl->stages[e]));
            w_end(wr);
        }
        e = end;
    }
    w_end(wr);
    if (tl->n_events > 0) {
        w_start(wr, "events");
        for (size_t i = 0; i < tl->n_events; i++) {
            const rt_event *ev = &tl->events[i];
            w_start(wr, "event");
            w_attr_number(wr, "onset-s", ev->onset_s);
            w_attr_number(wr, "duration-s", ev->duration_s);
            w_attr(wr, "type", rt_event_type_name(ev->type));
            if (ev->role >= 0 && ev->role < RT_ROLE_COUNT)
                w_attr(wr, "channel", rt_role_name((rt_role)ev->role));
            w_end(wr);
        }
        w_end(wr);
    }
    if (tl->n_manual > 0) {
        w_start(wr, "manual-rswa");
        for (size_t i = 0; i < tl->n_manual; i++) {
            const rt_manual_mini *m = &tl->manual[i];
            w_start(wr, "mini");
            w_attr_number(wr, "onset-s", m->onset_s);
            w_attr(wr, "role", rt_role_name((rt_role)m->role));
            w_attr(wr, "phasic", m->phasic ? "1" : "0");
            w_attr(wr, "tonic", m->tonic ? "1" : "0");
            w_end(wr);
        }
        w_end(wr);
    }
    w_end(wr);
}

rt_status rt_timeline_write_xml(const rt_timeline *tl, const char *path, rt_error *err)
{
    if (!tl || !path)
        return rt_fail(err, RT_ERR_USAGE, "rt_timeline_write_xml: NULL argument");
    size_t staged = 0;
    for (size_t i = 0; i < tl->n_epochs; i++)
        staged += tl->stages[i] != RT_STAGE_UNSCORED;
    if (staged == 0)
        return rt_fail(err, RT_ERR_USAGE, "%s: the timeline has no staged epoch to write", path);
    pthread_once(&libxml_once, libxml_init);
    xml_diag diag;
    memset(&diag, 0, sizeof diag);
    saved_handler saved;
    divert_errors(&saved, &diag);
    xmlBufferPtr buf = xmlBufferCreate();
    xmlTextWriterPtr w = buf ? xmlNewTextWriterMemory(buf, 0) : NULL;
    if (!w) {
        restore_errors(&saved);
        xmlBufferFree(buf);
        return rt_fail(err, RT_ERR_NOMEM, "%s: out of memory for the XML writer", path);
    }
    writer wr = {w, 0};
    if (xmlTextWriterSetIndent(w, 1) < 0 || xmlTextWriterSetIndentString(w, BAD_CAST "  ") < 0 ||
        xmlTextWriterStartDocument(w, "1.0", "UTF-8", NULL) < 0)
        wr.bad = 1;
    write_body(&wr, tl);
    if (xmlTextWriterEndDocument(w) < 0)
        wr.bad = 1;
    xmlFreeTextWriter(w); /* flushes into buf */
    restore_errors(&saved);
    rt_status st = RT_OK;
    if (wr.bad) {
        st = rt_fail(err, RT_ERR_NOMEM, "%s: the XML writer failed (out of memory?)", path);
    } else {
        rt_output out;
        st = rt_output_begin(&out, path, 1, err);
        if (st == RT_OK) {
            size_t n = (size_t)xmlBufferLength(buf);
            if (fwrite(xmlBufferContent(buf), 1, n, out.file) != n) {
                rt_output_abort(&out);
                st = rt_fail(err, rt_errno_status(errno, RT_ERR_IO),
                             "%s: cannot write: %s", path, strerror(errno));
            } else {
                st = rt_output_commit(&out, err);
            }
        }
    }
    xmlBufferFree(buf);
    return st;
}
