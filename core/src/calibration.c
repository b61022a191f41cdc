/*
 * calibration.c — the lab calibration {offset, pair_shift, exchange,
 * noise_sd, coupling_spread, unit} and the energy model E(λ) = E0 + V·C(n,2) +
 * J·c(λ). Owns no memory.
 */
#include "swapspec.h"

#include <math.h>
#include <string.h>

ss_calibration ss_calibration_default(void) {
    ss_calibration c;
    memset(&c, 0, sizeof c);
    c.exchange = 1.0;
    return c;
}

ss_status ss_calibration_validate(const ss_calibration *cal, ss_error *err) {
    if (cal == NULL)
        return ss_error_set(err, SS_EINVAL, "calibration",
                            "calibration is missing");
    const struct {
        const char *field;
        double value;
    } fields[] = {{"calibration.offset", cal->offset},
                  {"calibration.pair_shift", cal->pair_shift},
                  {"calibration.exchange", cal->exchange},
                  {"calibration.noise_sd", cal->noise_sd},
                  {"calibration.coupling_spread", cal->coupling_spread}};
    for (size_t i = 0; i < sizeof fields / sizeof fields[0]; i++)
        if (!isfinite(fields[i].value))
            return ss_error_set(err, SS_EINVAL, fields[i].field,
                                "must be a finite number");
    if (cal->exchange != 0.0 && !isnormal(cal->exchange))
        return ss_error_set(
            err, SS_EINVAL, "calibration.exchange",
            "exchange coupling %.3g is below the smallest normal number: "
            "energies divided by it leave the range of numbers",
            cal->exchange);
    if (cal->exchange == 0.0)
        return ss_error_set(
            err, SS_EINVAL, "calibration.exchange",
            "exchange coupling must be non-zero: with J = 0 "
            "the energy carries no information on the spectrum");
    if (cal->noise_sd < 0.0)
        return ss_error_set(err, SS_EINVAL, "calibration.noise_sd",
                            "noise_sd must be >= 0, got %.17g", cal->noise_sd);
    if (cal->coupling_spread < 0.0)
        return ss_error_set(err, SS_EINVAL, "calibration.coupling_spread",
                            "coupling_spread must be >= 0, got %.17g",
                            cal->coupling_spread);
    if (memchr(cal->unit, '\0', sizeof cal->unit) == NULL)
        return ss_error_set(err, SS_EINVAL, "calibration.unit",
                            "unit must be at most %zu characters",
                            sizeof cal->unit - 1);
    return SS_OK;
}

static double ss__pairs(unsigned atoms) {
    return 0.5 * (double)atoms * ((double)atoms - 1.0);
}

double ss_calibration_energy(const ss_calibration *cal, unsigned atoms,
                             int64_t content) {
    return cal->offset + cal->pair_shift * ss__pairs(atoms) +
           cal->exchange * (double)content;
}

double ss_calibration_content(const ss_calibration *cal, unsigned atoms,
                              double energy) {
    return (energy - cal->offset - cal->pair_shift * ss__pairs(atoms)) /
           cal->exchange;
}

ss_status ss_calibration_check_atoms(const ss_calibration *cal, unsigned atoms,
                                     ss_error *err) {
    double pairs = ss__pairs(atoms);
    double base = cal->offset + cal->pair_shift * pairs;
    double reach = fabs(cal->exchange) * pairs + 40.0 * cal->noise_sd;
    /* reach² bounds the energy variance, exchange²·Var(content) +
     * noise_sd², which must be a number too (fuzz finding: noise_sd
     * 6.1e207 made the predicted variance infinite) */
    if (!isfinite(base) || !isfinite(reach) || !isfinite(fabs(base) + reach) ||
        !isfinite(reach * reach))
        return ss_error_set(err, SS_EINVAL, "calibration",
                            "with %u atoms this calibration gives energies "
                            "beyond the range of numbers (offset + "
                            "pair_shift·C(n,2) = %.3g, exchange·C(n,2) + "
                            "40·noise_sd = %.3g): check its units",
                            atoms, base, reach);
    return SS_OK;
}
