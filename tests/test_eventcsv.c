/* Events CSV: header with units, one row per event, fields as the JSON events, numbers that read
 * back to 10 significant digits, empty fields for non-finite values and for previous_shot and
 * skin_shift_s where they do not apply (null in the JSON), an earlier tap's echo and a
 * skin-corrected echo, same bytes twice, the file written whole, and the decimal point kept under
 * a comma locale when one is installed. */
#include <locale.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "strandecho/eventcsv.h"
#include "testutil.h"

static void fill(se_locate_result *res, se_event *ev)
{
    memset(res, 0, sizeof *res);
    memset(ev, 0, 4 * sizeof *ev);
    ev[0].delay_s = 0.16666666666666666;
    ev[0].delay_uncertainty_s = 1.234567890123e-7;
    ev[0].distance_m = 250.00000012345;
    ev[0].distance_uncertainty_m = 0.125;
    ev[0].polarity = 1;
    ev[0].reflection = 0.3;
    ev[0].reflection_uncertainty = 0.01;
    ev[0].snr_db = 35.5;
    ev[0].multiple_of[0] = ev[0].multiple_of[1] = -1;
    ev[0].skin_shift_s = 1e-3; /* not skin_corrected: the column stays empty */
    ev[1] = ev[0];
    ev[1].delay_s = 0.3333333333333333;
    ev[1].distance_m = 500.0;
    ev[1].reflection = 0.09;
    ev[1].multiple = 1;
    ev[1].multiple_of[0] = 0;
    ev[1].multiple_of[1] = 0;
    ev[1].predicted = 0.0875;
    ev[1].skin_shift_s = 0.0;
    ev[2] = ev[0];
    ev[2].delay_s = 0.4;
    ev[2].distance_m = -1.5e-12; /* any sign and exponent survives */
    ev[2].polarity = -1;
    ev[2].impedance_increase = 1;
    ev[2].reflection = -0.2;
    ev[2].snr_db = NAN;
    ev[2].low_confidence = 1;
    ev[2].skin_corrected = 1;
    ev[2].skin_shift_s = 2.5e-9;
    ev[3] = ev[0];
    ev[3].delay_s = 0.45;
    ev[3].distance_m = 675.0;
    ev[3].reflection = 0.05;
    ev[3].multiple = 1; /* the echo of the tap two taps earlier: no pair of this tap explains it */
    ev[3].previous_shot = 2;
    ev[3].predicted = -0.0625;
    res->events = ev;
    res->n_events = 4;
    res->quantity = SE_Q_VELOCITY;
}

int main(void)
{
    se_locate_result res;
    se_event ev[4];
    se_error err;
    char *csv, *again, path[512], line[2048];
    FILE *fp;
    size_t rows = 0;

    fill(&res, ev);
    csv = se_events_csv(&res, &err);
    CHECK(csv != NULL);
    if (csv == NULL)
        return se_test_done("eventcsv");
    {
        static const char header[] = "index,delay_s,delay_uncertainty_s,distance_m,distance_uncertainty_m,polarity,"
                                     "impedance,class,reflection,reflection_uncertainty,snr_db,low_confidence,"
                                     "multiple,multiple_of,predicted_multiple,previous_shot,skin_corrected,"
                                     "skin_shift_s\n";
        CHECK(strncmp(csv, header, sizeof header - 1) == 0);
    }
    CHECK(strstr(csv, "\n1,0.1666666667,1.23456789e-07,250.0000001,0.125,upright,decrease,free-like,0.3,0.01,35.5,"
                      "false,false,,0,,false,\n") != NULL);
    CHECK(strstr(csv, "\n2,0.3333333333,") != NULL && strstr(csv, ",false,true,1;1,0.0875,,false,\n") != NULL);
    CHECK(strstr(csv, "\n3,0.4,1.23456789e-07,-1.5e-12,0.125,inverted,increase,fixed-like,-0.2,0.01,,true,false,,0,,"
                      "true,2.5e-09\n") != NULL);
    CHECK(strstr(csv, "\n4,0.45,1.23456789e-07,675,0.125,upright,decrease,free-like,0.05,0.01,35.5,false,true,,"
                      "-0.0625,2,false,\n") != NULL);
    /* every row has 18 fields and the numbers read back within %.10g rounding (5e-10 relative) */
    {
        const char *p = csv;
        while (*p) {
            const char *nl = strchr(p, '\n');
            size_t commas = 0;
            const char *q;
            for (q = p; q < nl; q++)
                commas += *q == ',';
            CHECK(commas == 17);
            if (rows > 0) {
                double d = strtod(strchr(strchr(strchr(p, ',') + 1, ',') + 1, ',') + 1, NULL);
                CHECK_CLOSE(d, ev[rows - 1].distance_m, 5e-10 * fabs(ev[rows - 1].distance_m), "distance reads back");
            }
            rows++;
            p = nl + 1;
        }
        CHECK(rows == 5);
    }
    again = se_events_csv(&res, &err);
    CHECK(again != NULL && strcmp(again, csv) == 0);
    free(again);

    /* a locale with a decimal comma must not leak into the file */
    if (setlocale(LC_NUMERIC, "de_DE.UTF-8") != NULL || setlocale(LC_NUMERIC, "fr_FR.UTF-8") != NULL) {
        again = se_events_csv(&res, &err);
        CHECK(again != NULL && strcmp(again, csv) == 0);
        free(again);
        setlocale(LC_NUMERIC, "C");
    } else {
        printf("note: no comma-decimal locale installed; the locale check did not run\n");
    }

    CHECK(se_events_csv_write(&res, se_test_binary_path(path, sizeof path, "tests/events-sample.csv"), &err) == SE_OK);
    fp = fopen(path, "r");
    CHECK(fp != NULL);
    if (fp != NULL) {
        size_t n = fread(line, 1, sizeof line - 1, fp);
        line[n] = '\0';
        fclose(fp);
        CHECK(strcmp(line, csv) == 0);
    }
    CHECK(se_events_csv_write(&res, "/nonexistent-folder/e.csv", &err) == SE_ERR_IO);
    res.n_events = 0;
    again = se_events_csv(&res, &err);
    CHECK(again != NULL && strchr(again, '\n') == again + strlen(again) - 1);
    free(again);
    CHECK(se_events_csv(NULL, &err) == NULL && err.code == SE_ERR_ARG);
    free(csv);
    return se_test_done("eventcsv");
}
