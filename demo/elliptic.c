/* demo/elliptic.c: see elliptic.h. */
#include "demo/elliptic.h"

#include <float.h>
#include <math.h>

double ellip_k(double m) {
    if (!(m <= 1)) return NAN;
    if (m == 1) return INFINITY;
    double a = 1, b = sqrt(1 - m);
    for (int i = 0; i < 64 && fabs(a - b) > 2 * DBL_EPSILON * a; i++) {
        double an = 0.5 * (a + b);
        b = sqrt(a * b);
        a = an;
    }
    return M_PI / (2 * a);    /* the mean lies between b and a: within 2 eps of a */
}
