/*
 * oracle_smoker.h — the pot composition that n equilibrium stages reach below xD with
 * constant α, in closed form: the test oracle that synthetic logs and round trips are
 * built with, independent of the stepping code under test. Header-only, no cmocka.
 */
#ifndef STAGECAL_ORACLE_SMOKER_H
#define STAGECAL_ORACLE_SMOKER_H

#include <math.h>

/* Pot composition after `n` stages (pot included) from xD at reflux r with constant
 * α, by Smoker's closed-form inverse (Smoker 1938, "Analytic determination of plates in
 * fractionating columns", Trans. AIChE 34, citation from memory) or Fenske at total reflux (Fenske
 * 1932, "Fractionation of straight-run Pennsylvania gasoline", Ind. Eng. Chem. 24, citation from
 * memory) — independent of the stepping code under test. */
static inline double oracle_smoker_xb(double alpha, double r, double xd, double n)
{
    if (isinf(r)) {
        double odds = xd / (1 - xd) / pow(alpha, n);
        return odds / (1 + odds);
    }
    double m = r / (r + 1), b = xd / (r + 1);
    double qa = m * (alpha - 1), qb = m + b * (alpha - 1) - alpha, qc = b;
    double disc = sqrt(qb * qb - 4 * qa * qc);
    double k1 = (-qb - disc) / (2 * qa), k2 = (-qb + disc) / (2 * qa);
    double k = (k1 > 0 && k1 < 1) ? k1 : k2;
    double c = 1 + (alpha - 1) * k;
    double beta = m * c * (alpha - 1) / (alpha - m * c * c);
    double a = m * c * c / alpha;
    return k + 1 / (beta + (1 / (xd - k) - beta) / pow(a, n));
}

#endif
