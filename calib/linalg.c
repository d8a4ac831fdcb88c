#include "linalg.h"

#include <math.h>
#include <string.h>

double linalg_smallest_eigvec(double *a, int n, double *v)
{
    double q[LINALG_MAX * LINALG_MAX];
    memset(q, 0, sizeof q);
    for (int i = 0; i < n; i++)
        q[i * n + i] = 1;
    for (int sweep = 0; sweep < 60; sweep++) {
        double off = 0, diag = 0;
        for (int i = 0; i < n; i++)
            for (int j = 0; j < n; j++)
                if (i != j)
                    off += a[i * n + j] * a[i * n + j];
                else
                    diag += a[i * n + i] * a[i * n + i];
        if (off <= 1e-30 * diag)
            break;
        for (int p = 0; p < n; p++)
            for (int r = p + 1; r < n; r++) {
                double apr = a[p * n + r];
                if (apr == 0)
                    continue;
                double theta = (a[r * n + r] - a[p * n + p]) / (2 * apr);
                double t = (theta >= 0 ? 1 : -1) / (fabs(theta) + sqrt(theta * theta + 1));
                double c = 1 / sqrt(t * t + 1), s = t * c;
                for (int k = 0; k < n; k++) { /* columns p, r */
                    double akp = a[k * n + p], akr = a[k * n + r];
                    a[k * n + p] = c * akp - s * akr;
                    a[k * n + r] = s * akp + c * akr;
                }
                for (int k = 0; k < n; k++) { /* rows p, r */
                    double apk = a[p * n + k], ark = a[r * n + k];
                    a[p * n + k] = c * apk - s * ark;
                    a[r * n + k] = s * apk + c * ark;
                }
                for (int k = 0; k < n; k++) {
                    double qkp = q[k * n + p], qkr = q[k * n + r];
                    q[k * n + p] = c * qkp - s * qkr;
                    q[k * n + r] = s * qkp + c * qkr;
                }
            }
    }
    int m = 0;
    for (int i = 1; i < n; i++)
        if (a[i * n + i] < a[m * n + m])
            m = i;
    for (int k = 0; k < n; k++)
        v[k] = q[k * n + m];
    return a[m * n + m];
}

int linalg_solve(double *a, double *b, int n)
{
    for (int c = 0; c < n; c++) {
        int p = c;
        for (int i = c + 1; i < n; i++)
            if (fabs(a[i * n + c]) > fabs(a[p * n + c]))
                p = i;
        if (!(fabs(a[p * n + c]) > 1e-300))
            return -1;
        if (p != c) {
            for (int k = 0; k < n; k++) {
                double t = a[c * n + k];
                a[c * n + k] = a[p * n + k];
                a[p * n + k] = t;
            }
            double t = b[c];
            b[c] = b[p];
            b[p] = t;
        }
        for (int i = c + 1; i < n; i++) {
            double f = a[i * n + c] / a[c * n + c];
            for (int k = c; k < n; k++)
                a[i * n + k] -= f * a[c * n + k];
            b[i] -= f * b[c];
        }
    }
    for (int c = n - 1; c >= 0; c--) {
        double s = b[c];
        for (int k = c + 1; k < n; k++)
            s -= a[c * n + k] * b[k];
        b[c] = s / a[c * n + c];
    }
    return 0;
}
