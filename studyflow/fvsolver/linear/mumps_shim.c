/* Thin C entry points to sequential MUMPS for studyflow-fv's ctypes binding (linear/mumps.py).
 *
 * MUMPS's control structure is large and its layout is fixed only by its own header, so it is
 * kept here, on the C side; Python sees an opaque handle and six calls. Every call reports
 * MUMPS's INFOG(1), INFOG(2) and INFOG(28) through `info` (INFOG(1) < 0 is an error, see the
 * MUMPS users' guide, section "Error diagnostics"; INFOG(28) counts the null pivots found when
 * null-pivot detection, ICNTL(24), is on).
 */
#include <stdlib.h>
#include "dmumps_c.h"

#define ICNTL(I) icntl[(I) - 1]
#define USE_COMM_WORLD -987654 /* the sequential library's stand-in communicator */

typedef struct { DMUMPS_STRUC_C id; } sf_handle;

static void sf_run(sf_handle *h, int job, int *info) {
  h->id.job = job;
  dmumps_c(&h->id);
  info[0] = h->id.infog[0];
  info[1] = h->id.infog[1];
  info[2] = h->id.infog[27];
}

void *sf_new(int *info) {
  sf_handle *h = calloc(1, sizeof(sf_handle));
  if (!h) { info[0] = -13; info[1] = 0; info[2] = 0; return NULL; }
  h->id.comm_fortran = USE_COMM_WORLD;
  h->id.par = 1; /* the host takes part in the work: there is only the host */
  h->id.sym = 0; /* unsymmetric: the Newton Jacobian of the convective terms is */
  sf_run(h, -1, info);
  /* silence MUMPS's own printing: the solver prints its own iteration lines */
  h->id.ICNTL(1) = -1; h->id.ICNTL(2) = -1; h->id.ICNTL(3) = -1; h->id.ICNTL(4) = 0;
  return h;
}

void sf_set(void *p, int i, int value) { ((sf_handle *)p)->id.ICNTL(i) = value; }

void sf_analyse(void *p, int n, long long nnz, int *irn, int *jcn, double *a, int *info) {
  sf_handle *h = p;
  h->id.n = n; h->id.nnz = nnz; h->id.irn = irn; h->id.jcn = jcn; h->id.a = a;
  sf_run(h, 1, info);
}

void sf_factor(void *p, double *a, int *info) { sf_handle *h = p; h->id.a = a; sf_run(h, 2, info); }

void sf_solve(void *p, double *rhs, int *info) { sf_handle *h = p; h->id.rhs = rhs; sf_run(h, 3, info); }

void sf_free(void *p) {
  int info[3];
  if (!p) return;
  sf_run((sf_handle *)p, -2, info);
  free(p);
}
