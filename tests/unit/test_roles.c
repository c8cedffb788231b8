/* Channel roles: label forms in use at sleep laboratories (common practice:
 * no published list exists; muscle names from the AASM manual's EMG montage,
 * chin = submentalis/mentalis, arm = flexor digitorum superficialis, leg =
 * tibialis anterior), ambiguity, overrides and bipolar derivations. */
#include "support.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "remtone/roles.h"

typedef struct label_case {
    const char *label, *transducer;
    rt_role role;
} label_case;

/* Numbering 1 = left, 2 = right for FDS1/FDS2 and Leg1/Leg2 is common practice. */
static const label_case LABELS[] = {
    {"Chin", "", RT_ROLE_CHIN}, {"Chin1-Chin2", "", RT_ROLE_CHIN}, {"Chin2-Chin1", "", RT_ROLE_CHIN},
    {"Chin1", "", RT_ROLE_CHIN}, {"EMG submental", "", RT_ROLE_CHIN}, {"Submental", "", RT_ROLE_CHIN},
    {"Ment", "", RT_ROLE_CHIN}, {"Mentalis", "", RT_ROLE_CHIN}, {"EMG Chin", "", RT_ROLE_CHIN},
    {"CHIN EMG", "", RT_ROLE_CHIN}, {"SM", "", RT_ROLE_CHIN},
    {"FDS L", "", RT_ROLE_ARM_LEFT}, {"FDS-L", "", RT_ROLE_ARM_LEFT}, {"L FDS", "", RT_ROLE_ARM_LEFT},
    {"Arm L", "", RT_ROLE_ARM_LEFT}, {"LArm", "", RT_ROLE_ARM_LEFT}, {"Left arm", "", RT_ROLE_ARM_LEFT},
    {"FDS1", "", RT_ROLE_ARM_LEFT}, {"Arm R", "", RT_ROLE_ARM_RIGHT}, {"RArm", "", RT_ROLE_ARM_RIGHT},
    {"EMG FDS right", "", RT_ROLE_ARM_RIGHT}, {"FDS2", "", RT_ROLE_ARM_RIGHT},
    {"LAT", "", RT_ROLE_LEG_LEFT}, {"RAT", "", RT_ROLE_LEG_RIGHT}, {"Tib L", "", RT_ROLE_LEG_LEFT},
    {"Tib R", "", RT_ROLE_LEG_RIGHT}, {"TibL", "", RT_ROLE_LEG_LEFT}, {"Leg L", "", RT_ROLE_LEG_LEFT},
    {"Leg R", "", RT_ROLE_LEG_RIGHT}, {"Left leg", "", RT_ROLE_LEG_LEFT}, {"Right Leg", "", RT_ROLE_LEG_RIGHT},
    {"LLEG", "", RT_ROLE_LEG_LEFT}, {"RLEG", "", RT_ROLE_LEG_RIGHT}, {"Leg1", "", RT_ROLE_LEG_LEFT},
    {"Leg2", "", RT_ROLE_LEG_RIGHT}, {"EMG Tib.L", "", RT_ROLE_LEG_LEFT},
    {"Tibialis anterior left", "", RT_ROLE_LEG_LEFT}, {"LAT1-LAT2", "", RT_ROLE_LEG_LEFT},
    {"ECG", "", RT_ROLE_ECG}, {"EKG", "", RT_ROLE_ECG}, {"ECG II", "", RT_ROLE_ECG},
    {"ECG1-ECG2", "", RT_ROLE_ECG}, {"EKG L", "", RT_ROLE_ECG},
    /* the transducer lends the muscle to a side-only label */
    {"L", "Leg EMG", RT_ROLE_LEG_LEFT}, {"EMG R", "FDS surface electrode", RT_ROLE_ARM_RIGHT},
    {"R", "AgAgCl electrode", RT_ROLE_NONE},
    /* not EMG/ECG: EEG, EOG, respiration, oximetry, position */
    {"C4-M1", "", RT_ROLE_NONE}, {"F4-A1", "", RT_ROLE_NONE}, {"E1-M2", "", RT_ROLE_NONE},
    {"LOC", "", RT_ROLE_NONE}, {"ROC", "", RT_ROLE_NONE}, {"Airflow", "", RT_ROLE_NONE},
    {"Thor", "", RT_ROLE_NONE}, {"SpO2", "", RT_ROLE_NONE}, {"Snore", "", RT_ROLE_NONE},
    {"Pos", "", RT_ROLE_NONE}, {"Machine", "", RT_ROLE_NONE}, {"Chinstrap", "", RT_ROLE_NONE},
    {"C4-M1", "Chin electrode", RT_ROLE_NONE},
    /* too generic or contradictory: left to the user */
    {"EMG1-EMG2", "", RT_ROLE_NONE}, {"EMG", "", RT_ROLE_NONE}, {"Leg", "", RT_ROLE_NONE},
    {"LAT-RAT", "", RT_ROLE_NONE}, {"Chin-Leg L", "", RT_ROLE_NONE}, {"", "", RT_ROLE_NONE},
};

static void label_table(void **state)
{
    (void)state;
    int wrong = 0;
    for (size_t i = 0; i < sizeof LABELS / sizeof LABELS[0]; i++) {
        rt_role got = rt_role_detect(LABELS[i].label, LABELS[i].transducer);
        if (got != LABELS[i].role) {
            printf("label \"%s\" transducer \"%s\": %s, expected %s\n", LABELS[i].label, LABELS[i].transducer,
                   rt_role_name(got), rt_role_name(LABELS[i].role));
            wrong++;
        }
    }
    assert_int_equal(wrong, 0);
    assert_int_equal(rt_role_detect(NULL, NULL), RT_ROLE_NONE);
}

static void role_names(void **state)
{
    (void)state;
    for (int r = 0; r < RT_ROLE_COUNT; r++)
        assert_int_equal(rt_role_from_name(rt_role_name((rt_role)r)), r);
    assert_string_equal(rt_role_name(RT_ROLE_ARM_LEFT), "arm-left");
    assert_string_equal(rt_role_name(RT_ROLE_NONE), "none");
    assert_int_equal(rt_role_from_name("elbow"), RT_ROLE_NONE);
}

/* ---- small EDF files: every signal -1000..1000 uV over the 16-bit range ---- */

typedef struct chan {
    const char *label, *unit;
    int spr;
} chan;

static int digital_value(int k, int j) { return (j * 37 + k * 1001) % 20000 - 10000; }

static double uv_value(int k, int j) { return -1000.0 + (digital_value(k, j) + 32768) * 2000.0 / 65535.0; }

static void put_signal_headers(unsigned char *h, const chan *c, int ns)
{
    for (int k = 0; k < ns; k++) {
        char spr[16];
        snprintf(spr, sizeof spr, "%d", c[k].spr);
        const char *text[10] = {c[k].label, "", c[k].unit, "-1000", "1000", "-32768", "32767", "", spr, ""};
        for (int f = 0; f < 10; f++)
            rt_test_edf_put_signal(h, ns, f, k, text[f]);
    }
}

static rt_recording *open_channels(const char *name, const chan *c, int ns)
{
    size_t header = 256 * (size_t)(ns + 1), record = 0;
    for (int k = 0; k < ns; k++)
        record += 2 * (size_t)c[k].spr;
    unsigned char *b = calloc(header + record, 1);
    rt_test_edf_put_main(b, &(rt_test_edf_main){.patient = "Fictional", .recording = "", .date = "01.12.26",
                                                .time = "22.00.00", .reserved = "", .n_records = 1,
                                                .record_s = "1", .ns = ns});
    put_signal_headers(b, c, ns);
    unsigned char *at = b + header;
    for (int k = 0; k < ns; k++)
        for (int j = 0; j < c[k].spr; j++, at += 2) {
            int d = digital_value(k, j);
            at[0] = (unsigned char)(d & 0xff);
            at[1] = (unsigned char)((d >> 8) & 0xff);
        }
    char path[4400];
    snprintf(path, sizeof path, "%s/rec.edf", rt_test_dir(name));
    rt_test_write_file(path, b, header + record);
    free(b);
    rt_error err;
    rt_recording *rec = NULL;
    if (rt_recording_open(path, &rec, &err) != RT_OK)
        fail_msg("%s", err.message);
    return rec;
}

static const chan MONTAGE[] = {
    {"C4-M1", "uV", 128}, {"Chin1", "uV", 256}, {"Chin2", "uV", 256}, {"Chin3", "uV", 256},
    {"Leg L", "uV", 256}, {"Leg R", "uV", 256}, {"ECG", "mV", 256},   {"Chin4", "uV", 128},
};

static void three_chin_electrodes_are_ambiguous(void **state)
{
    (void)state;
    rt_recording *rec = open_channels("roles_ambiguous", MONTAGE, 4);
    rt_role_map map;
    rt_error err;
    assert_int_equal(rt_roles_resolve(rec, NULL, &map, &err), RT_ERR_CHANNEL);
    assert_non_null(strstr(err.message, "\"Chin1\" (#2), \"Chin2\" (#3) and \"Chin3\" (#4)"));
    assert_non_null(strstr(err.message, "--chin Chin1-Chin2"));
    rt_recording_close(rec);

    const chan two[] = {{"Chin", "uV", 256}, {"EMG submental", "uV", 256}};
    rec = open_channels("roles_two", two, 2);
    assert_int_equal(rt_roles_resolve(rec, NULL, &map, &err), RT_ERR_CHANNEL);
    assert_non_null(strstr(err.message, "\"Chin\" (#1) and \"EMG submental\" (#2)"));
    assert_non_null(strstr(err.message, "--chin LABEL"));
    rt_recording_close(rec);
}

static void detection_and_bipolar_override(void **state)
{
    (void)state;
    rt_recording *rec = open_channels("roles_bipolar", MONTAGE, 7);
    rt_role_options opt = {.override = {[RT_ROLE_CHIN] = "chin1-Chin2"}};
    rt_role_map map;
    rt_error err;
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_OK);
    const rt_role_source *chin = &map.role[RT_ROLE_CHIN];
    assert_int_equal(chin->channel, 1);
    assert_int_equal(chin->reference, 2);
    assert_string_equal(chin->label, "Chin1-Chin2");
    assert_false(chin->detected);
    assert_true(chin->rate_hz == 256.0);
    assert_int_equal(map.role[RT_ROLE_LEG_LEFT].channel, 4);
    assert_true(map.role[RT_ROLE_LEG_LEFT].detected);
    assert_int_equal(map.role[RT_ROLE_LEG_RIGHT].channel, 5);
    assert_int_equal(map.role[RT_ROLE_ECG].channel, 6);
    assert_int_equal(map.role[RT_ROLE_ARM_LEFT].channel, -1);
    /* A minus B, sample by sample, from the digital values written. */
    double out[40], scratch[40];
    assert_int_equal(rt_role_read_uv(rec, chin, 100, 40, out, scratch, &err), RT_OK);
    for (int j = 0; j < 40; j++)
        assert_true(fabs(out[j] - (uv_value(1, 100 + j) - uv_value(2, 100 + j))) < 1e-9);
    assert_int_equal(rt_role_read_uv(rec, chin, 0, 4, out, NULL, &err), RT_ERR_USAGE);
    assert_int_equal(rt_role_read_uv(rec, &map.role[RT_ROLE_ARM_LEFT], 0, 4, out, NULL, &err), RT_ERR_CHANNEL);
    /* ECG in mV comes out in uV */
    assert_int_equal(rt_role_read_uv(rec, &map.role[RT_ROLE_ECG], 0, 4, out, NULL, &err), RT_OK);
    assert_true(fabs(out[3] - 1e3 * uv_value(6, 3)) < 1e-6);
    rt_recording_close(rec);
}

static void override_by_label(void **state)
{
    (void)state;
    const chan c[] = {{"Chin1-Chin2", "uV", 256}, {"Chin1", "uV", 256}, {"Chin2", "uV", 256}};
    rt_recording *rec = open_channels("roles_label", c, 3);
    rt_role_map map;
    rt_error err;
    /* A label holding '-' is one channel before it is a pair. */
    rt_role_options opt = {.override = {[RT_ROLE_CHIN] = "Chin1-Chin2"}};
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_OK);
    assert_int_equal(map.role[RT_ROLE_CHIN].channel, 0);
    assert_int_equal(map.role[RT_ROLE_CHIN].reference, -1);
    opt.override[RT_ROLE_CHIN] = " chin2 ";
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_OK);
    assert_int_equal(map.role[RT_ROLE_CHIN].channel, 2);
    double out[8];
    assert_int_equal(rt_role_read_uv(rec, &map.role[RT_ROLE_CHIN], 0, 8, out, NULL, &err), RT_OK);
    assert_true(fabs(out[7] - uv_value(2, 7)) < 1e-9);
    opt.override[RT_ROLE_ARM_LEFT] = "FDS L";
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_ERR_CHANNEL);
    assert_non_null(strstr(err.message, "--arm-left \"FDS L\""));
    assert_non_null(strstr(err.message, "\"Chin1-Chin2\" (#1), \"Chin1\" (#2), \"Chin2\" (#3)"));
    /* '#N' names channel N counted from 1 (docs/recording.md, "Overrides") */
    opt.override[RT_ROLE_ARM_LEFT] = NULL;
    opt.override[RT_ROLE_CHIN] = "#3";
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_OK);
    assert_int_equal(map.role[RT_ROLE_CHIN].channel, 2);
    opt.override[RT_ROLE_CHIN] = "#4";
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_ERR_CHANNEL);
    rt_recording_close(rec);
}

static void unequal_rates_refused(void **state)
{
    (void)state;
    rt_recording *rec = open_channels("roles_rates", MONTAGE, 8);
    rt_role_options opt = {.override = {[RT_ROLE_CHIN] = "Chin1-Chin4"}};
    rt_role_map map;
    rt_error err;
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_ERR_CHANNEL);
    assert_non_null(strstr(err.message, "256 Hz and 128 Hz"));
    opt.override[RT_ROLE_CHIN] = "Chin1-Chin1";
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_ERR_CHANNEL);
    rt_recording_close(rec);
}

static void non_voltage_emg(void **state)
{
    (void)state;
    const chan c[] = {{"Chin", "%", 256}, {"ECG", "bpm", 1}};
    rt_recording *rec = open_channels("roles_units", c, 2);
    rt_role_map map;
    rt_error err;
    assert_int_equal(rt_roles_resolve(rec, NULL, &map, &err), RT_ERR_CHANNEL);
    assert_non_null(strstr(err.message, "unit \"%\", not a voltage"));
    rt_role_options opt = {.allow_any_unit = true};
    assert_int_equal(rt_roles_resolve(rec, &opt, &map, &err), RT_OK);
    assert_int_equal(map.role[RT_ROLE_CHIN].channel, 0);
    rt_recording_close(rec);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(label_table),
        cmocka_unit_test(role_names),
        cmocka_unit_test(three_chin_electrodes_are_ambiguous),
        cmocka_unit_test(detection_and_bipolar_override),
        cmocka_unit_test(override_by_label),
        cmocka_unit_test(unequal_rates_refused),
        cmocka_unit_test(non_voltage_emg),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
