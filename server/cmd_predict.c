/*
 * cmd_predict.c — `swapspec predict`: the exact law of the energy readout.
 *
 * Owns the predict command: from (levels, atoms, spectrum, calibration) it
 * asks the core for the full Schur–Weyl table (ss_distribution_compute),
 * ranks the diagrams (ss_distribution_order_by_probability), groups them
 * into energy levels (ss_levels_alloc) and renders the moments, the K most
 * probable diagrams and every energy level as one JSON document.
 */
#include <stdlib.h>

#include "calibration_file.h"
#include "cli_json.h"
#include "commands.h"

enum { OPT_LEVELS, OPT_ATOMS, OPT_SPECTRUM, OPT_TOP, OPT_CALIBRATION, OPT_N };

#define PREDICT_DEFAULT_TOP 20
#define PREDICT_PER_LEVEL 8 /* diagrams listed per energy level */
/* Most entries (ranked diagrams, energy levels, diagrams listed under the
 * levels) one served document may hold.  Rendering and sending cost about
 * 6 µs an entry on the 2-core reference machine, Release build, over HTTP
 * ((n, d) = (63, 16): 3.05 s with top 79 066, 2.59 s with top 20), and
 * 15-20 µs in documents of a million entries (907 000 ranked diagrams of
 * (63, 16) in 19 s, a million levels of (3461, 3) in 13 s), so 100 000
 * take well under 2 s; the Schur table before them is bounded by the
 * budget's max_table_cells (about 2.5 s at the service's 8 000 000). */
#define PREDICT_SERVED_ENTRIES 100000ULL

static const cli_option predict_options[OPT_N] = {
    [OPT_LEVELS] = CLI_OPTION_LEVELS,
    [OPT_ATOMS] = CLI_OPTION_ATOMS,
    [OPT_SPECTRUM] = CLI_OPTION_SPECTRUM,
    [OPT_TOP] = {"top", CLI_UINT, 0, "K", 0, 100000000, 0,
                 "list the K most probable diagrams (default 20)"},
    [OPT_CALIBRATION] = CLI_OPTION_CALIBRATION,
};

/* Everything one rendering needs. */
typedef struct {
    unsigned atoms;
    unsigned levels;
    const ss_calibration *cal;
    const ss_distribution *dist;
    const size_t *order;
    const ss_levels *groups;
} predict_view;

static json_t *predict_diagram(const predict_view *pv, size_t i,
                               ss_error *err) {
    const ss_diagram_set *set = pv->dist->diagrams;
    json_t *obj = json_object();
    if (obj == NULL) {
        ss_error_set(err, SS_ENOMEM, "diagrams", "no memory");
        return NULL;
    }
    int64_t c = set->content[i];
    cli_json_put(obj, "diagram",
                 cli_json_diagram(set->rows + i * set->levels, set->levels),
                 err);
    cli_json_put_int(obj, "content", c, err);
    cli_json_put_real(obj, "energy",
                      ss_calibration_energy(pv->cal, pv->atoms, c), err);
    cli_json_put_real(obj, "probability", pv->dist->probability[i], err);
    return obj;
}

static json_t *predict_top(const predict_view *pv, size_t top, ss_error *err) {
    json_t *arr = json_array();
    size_t count = pv->dist->diagrams->count;
    for (size_t k = 0; arr != NULL && k < top && k < count; k++)
        cli_json_append(arr, predict_diagram(pv, pv->order[k], err), err);
    return arr;
}

static json_t *predict_level(const predict_view *pv, size_t l, ss_error *err) {
    const ss_levels *g = pv->groups;
    const ss_diagram_set *set = pv->dist->diagrams;
    size_t first = g->first[l], members = g->first[l + 1] - g->first[l];
    json_t *obj = json_object();
    json_t *list = json_array();
    for (size_t k = 0; list != NULL && k < members && k < PREDICT_PER_LEVEL;
         k++) {
        size_t i = g->members[first + k];
        cli_json_append(
            list, cli_json_diagram(set->rows + i * set->levels, set->levels),
            err);
    }
    if (obj == NULL) {
        json_decref(list);
        return NULL;
    }
    cli_json_put_int(obj, "content", g->content[l], err);
    cli_json_put_real(obj, "energy",
                      ss_calibration_energy(pv->cal, pv->atoms, g->content[l]),
                      err);
    cli_json_put_real(obj, "probability", g->probability[l], err);
    cli_json_put_int(obj, "diagram_count", (int64_t)members, err);
    cli_json_put(obj, "diagrams", list, err);
    if (members > PREDICT_PER_LEVEL)
        cli_json_put(obj, "diagrams_truncated", json_true(), err);
    return obj;
}

static json_t *predict_levels(const predict_view *pv, ss_error *err) {
    json_t *arr = json_array();
    for (size_t l = 0; arr != NULL && l < pv->groups->count; l++)
        cli_json_append(arr, predict_level(pv, l, err), err);
    return arr;
}

static void predict_render(json_t *doc, const predict_view *pv, size_t top,
                           const char *cal_source, ss_error *err) {
    const ss_distribution *dist = pv->dist;
    const ss_calibration *cal = pv->cal;
    double pairs = 0.5 * (double)pv->atoms * (double)(pv->atoms - 1);
    json_t *power = json_object();
    if (power != NULL) {
        cli_json_put_real(power, "p2",
                          ss_spectrum_power_sum(dist->spectrum, pv->levels, 2),
                          err);
        cli_json_put_real(power, "p3",
                          ss_spectrum_power_sum(dist->spectrum, pv->levels, 3),
                          err);
    }
    cli_json_put_int(doc, "levels", pv->levels, err);
    cli_json_put_int(doc, "atoms", pv->atoms, err);
    cli_json_put(doc, "spectrum",
                 cli_json_reals(dist->spectrum, pv->levels, "spectrum", err),
                 err);
    cli_json_put_int(doc, "total_diagrams", (int64_t)dist->diagrams->count,
                     err);
    cli_json_put_real(doc, "mean_content", dist->mean_content, err);
    cli_json_put_real(doc, "content_variance", dist->content_variance, err);
    cli_json_put_real(doc, "mean_energy",
                      cal->offset + cal->pair_shift * pairs +
                          cal->exchange * dist->mean_content,
                      err);
    cli_json_put_real(doc, "energy_variance",
                      cal->exchange * cal->exchange * dist->content_variance +
                          cal->noise_sd * cal->noise_sd,
                      err);
    cli_json_put(doc, "power_sums", power, err);
    cli_json_put(doc, "diagrams", predict_top(pv, top, err), err);
    cli_json_put(doc, "energy_levels", predict_levels(pv, err), err);
    cli_json_put(doc, "calibration", cli_json_calibration(cal, cal_source, err),
                 err);
    cli_json_put_string(
        doc, "notes",
        "Probabilities, means and variances are exact values of the "
        "Schur-Weyl model for this spectrum and calibration. Measured "
        "energies are random draws from it: individual readings and "
        "averages over a finite run scatter around these values "
        "(energy_variance includes the detection noise).",
        err);
}

/* The cost model of a served prediction, before the table is computed:
 * with N = ss_diagram_count(n, d) diagrams and at most
 * L = min(N, C(n,2) − c_min + 1) energy levels (distinct contents), the
 * document lists at most min(top, N) + L + min(N, 8 L) entries.  Over
 * PREDICT_SERVED_ENTRIES: SS_EBUDGET naming top when fewer ranked diagrams
 * would do, else atoms. */
static ss_status predict_check(const cli_value *v, unsigned atoms,
                               unsigned levels, ss_error *err) {
    unsigned long long count = ss_diagram_count(atoms, levels);
    unsigned long long lv = ss_diagram_content_levels_max(atoms, levels, count);
    unsigned long long listed = PREDICT_PER_LEVEL * lv;
    unsigned long long top =
        v[OPT_TOP].present ? v[OPT_TOP].u : PREDICT_DEFAULT_TOP;
    unsigned long long part = lv + (listed < count ? listed : count);
    unsigned long long ranked = top < count ? top : count;
    if (ranked + part <= PREDICT_SERVED_ENTRIES)
        return SS_OK;
    int by_top = v[OPT_TOP].present && part <= PREDICT_SERVED_ENTRIES;
    return ss_error_set(err, SS_EBUDGET, by_top ? "top" : "atoms",
                        "at most %llu entries (ranked diagrams, energy levels "
                        "and the diagrams listed under them) per request; "
                        "got up to %llu: %llu ranked of %llu diagrams, up to "
                        "%llu energy levels of %u atoms on %u levels with up "
                        "to %llu diagrams under them",
                        PREDICT_SERVED_ENTRIES, ranked + part, ranked, count,
                        lv, atoms, levels, part - lv);
}

static ss_status predict_run(const cli_parsed *args, json_t **doc_out,
                             ss_error *err) {
    const cli_value *v = args->values;
    const char *cal_path =
        v[OPT_CALIBRATION].present ? v[OPT_CALIBRATION].text : NULL;
    const char *cal_source = "default";
    ss_calibration cal = ss_calibration_default();
    if (cli_calibration_resolve(args->calibration, cal_path, &cal, &cal_source,
                                err) != SS_OK ||
        ss_calibration_check_atoms(&cal, (unsigned)v[OPT_ATOMS].u, err) !=
            SS_OK)
        return err->code;

    predict_view pv = {(unsigned)v[OPT_ATOMS].u,
                       (unsigned)v[OPT_LEVELS].u,
                       &cal,
                       NULL,
                       NULL,
                       NULL};
    if (args->budget != NULL && /* served over HTTP */
        predict_check(v, pv.atoms, pv.levels, err) != SS_OK)
        return err->code;
    ss_distribution *dist = NULL;
    if (ss_distribution_compute(pv.atoms, pv.levels, v[OPT_SPECTRUM].list,
                                v[OPT_SPECTRUM].list_len, args->budget, &dist,
                                err) != SS_OK)
        return err->code;
    size_t *order = ss_distribution_order_by_probability(dist);
    ss_levels *groups = NULL;
    if (order == NULL)
        ss_error_set(err, SS_ENOMEM, "", "no memory to rank the diagrams");
    else
        ss_levels_alloc(dist->diagrams, dist->probability, &groups, err);
    json_t *doc = json_object();
    if (doc == NULL)
        ss_error_set(err, SS_ENOMEM, "", "no memory for the result");
    if (err->code == SS_OK) {
        pv.dist = dist;
        pv.order = order;
        pv.groups = groups;
        size_t top =
            v[OPT_TOP].present ? (size_t)v[OPT_TOP].u : PREDICT_DEFAULT_TOP;
        predict_render(doc, &pv, top, cal_source, err);
    }
    ss_levels_free(groups);
    free(order);
    ss_distribution_free(dist);
    return cli_json_finish(doc, doc_out, err);
}

const cli_command cli_cmd_predict = {
    "predict",
    "exact law of the energy readout for a given spectrum",
    "Exact law of the interaction-energy readout of n atoms whose spin state "
    "has the given spectrum: content and energy moments, the most probable "
    "Young diagrams, and every energy level with its probability.",
    predict_options,
    OPT_N,
    "Output: one JSON object on stdout.  Probabilities are exact model "
    "values; measured readings are random draws from this law.",
    predict_run,
    NULL,
};
