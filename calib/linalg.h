/* linalg: the small dense linear algebra calibration needs.
 *
 * Row-major double matrices of a few dozen rows at most: the smallest
 * eigenvector of a symmetric matrix (cyclic Jacobi rotations, which are
 * accurate for the nearly singular normal matrices of a DLT) and the
 * solution of a square system (Gaussian elimination with partial
 * pivoting).  Works in the caller's arrays plus a fixed stack buffer;
 * never allocates, never prints. */
#ifndef ST_CALIB_LINALG_H
#define ST_CALIB_LINALG_H

#define LINALG_MAX 12

/* a: n x n symmetric (n <= LINALG_MAX), destroyed.  v receives the unit
 * eigenvector of the smallest eigenvalue, returned. */
double linalg_smallest_eigvec(double *a, int n, double *v);

/* Solves the n x n system a x = b in place (a destroyed, b becomes x; any
 * n, elimination runs in a).  Returns 0, or -1 when a is singular. */
int linalg_solve(double *a, double *b, int n);

#endif
