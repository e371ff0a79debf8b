/* module.c: the CPython/NumPy binding wkbfit._core, the only file that includes Python.h.
 *
 * Arrays in, arrays out: each call crosses the binding once with whole arrays. Inputs go
 * through PyArray_FROM_OTF (never modified), outputs are allocated before the work, and
 * only pure C runs between Py_BEGIN_ALLOW_THREADS / Py_END_ALLOW_THREADS.
 * A potential is passed as (model name, parameter array, curve capsule or None).
 */
#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <numpy/arrayobject.h>

#include <limits.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_version.h>

#include "wkb.h"

static const char *CURVE_CAPSULE = "wkbfit.pointwise_curve";

/* Raises the Python exception for a failed core call: input problems are ValueError. */
static PyObject *raise_status(const wkb_error *err)
{
    PyObject *type = PyExc_ValueError;
    if (err->status == WKB_ENOMEM)
        type = PyExc_MemoryError;
    else if (err->status == WKB_ENOCONV || err->status == WKB_ENUMERIC)
        type = PyExc_RuntimeError;
    PyErr_SetString(type, err->message[0] ? err->message : wkb_status_name(err->status));
    return NULL;
}

/* ValueError with a printf-style message (PyErr_Format knows no floating-point formats). */
static PyObject *value_error(const char *fmt, ...)
{
    char buf[512];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    PyErr_SetString(PyExc_ValueError, buf);
    return NULL;
}

/* A read-only C-contiguous double array from any array-like; NULL with an exception. */
static PyArrayObject *as_double_array(PyObject *obj, const char *what, int ndim)
{
    PyArrayObject *a = (PyArrayObject *)PyArray_FROM_OTF(obj, NPY_DOUBLE, NPY_ARRAY_IN_ARRAY);
    if (!a)
        return NULL;
    if (ndim >= 0 && PyArray_NDIM(a) != ndim) {
        PyErr_Format(PyExc_ValueError, "%s must be a %d-dimensional array of numbers, got %d dimensions",
                     what, ndim, PyArray_NDIM(a));
        Py_DECREF(a);
        return NULL;
    }
    return a;
}

/* A fit's parameter flags and bounds (vary, lower, upper: one entry per parameter of the model) into
   spec; -1 with a ValueError naming the mismatch. */
static int parse_fit_spec(PyObject *vary_obj, PyObject *lower_obj, PyObject *upper_obj, size_t np, wkb_fit_spec *spec)
{
    int status = -1;
    PyArrayObject *vary = (PyArrayObject *)PyArray_FROM_OTF(vary_obj, NPY_INT, NPY_ARRAY_IN_ARRAY | NPY_ARRAY_FORCECAST);
    PyArrayObject *lower = vary ? as_double_array(lower_obj, "lower", 1) : NULL;
    PyArrayObject *upper = lower ? as_double_array(upper_obj, "upper", 1) : NULL;
    if (!upper)
        goto done;
    if ((size_t)PyArray_SIZE(vary) != np || (size_t)PyArray_SIZE(lower) != np || (size_t)PyArray_SIZE(upper) != np) {
        PyErr_Format(PyExc_ValueError, "vary, lower and upper need %zu entries (one per parameter)", np);
        goto done;
    }
    memset(spec, 0, sizeof *spec);
    for (size_t k = 0; k < np; k++) {
        spec->vary[k] = ((const int *)PyArray_DATA(vary))[k] != 0;
        spec->lower[k] = ((const double *)PyArray_DATA(lower))[k];
        spec->upper[k] = ((const double *)PyArray_DATA(upper))[k];
    }
    status = 0;
done:
    Py_XDECREF(vary);
    Py_XDECREF(lower);
    Py_XDECREF(upper);
    return status;
}

/* A 1-dimensional C int array of quantum numbers (or flags) from any array-like, checked
   element by element through doubles: a value that is not an integer in [lo, INT_MAX] is
   refused by name instead of wrapping (v = 2**32 + 2 would become 2 in a plain cast).
   NULL with a ValueError/TypeError. */
static PyArrayObject *as_checked_int_array(PyObject *obj, const char *what, long lo)
{
    PyArrayObject *d = (PyArrayObject *)PyArray_FROM_OTF(obj, NPY_DOUBLE, NPY_ARRAY_IN_ARRAY);
    if (!d) {
        if (PyErr_ExceptionMatches(PyExc_OverflowError) || PyErr_ExceptionMatches(PyExc_ValueError) ||
            PyErr_ExceptionMatches(PyExc_TypeError)) {
            PyErr_Clear();
            PyErr_Format(PyExc_ValueError, "%s must be integers in %ld..%d", what, lo, INT_MAX);
        }
        return NULL;
    }
    if (PyArray_NDIM(d) > 1) {
        PyErr_Format(PyExc_ValueError, "%s must be a 1-dimensional array of integers, got %d dimensions", what,
                     PyArray_NDIM(d));
        Py_DECREF(d);
        return NULL;
    }
    const npy_intp n = PyArray_SIZE(d);
    PyArrayObject *out = (PyArrayObject *)PyArray_SimpleNew(1, (npy_intp[]){n}, NPY_INT);
    if (!out) {
        Py_DECREF(d);
        return NULL;
    }
    const double *x = PyArray_DATA(d);
    int *y = PyArray_DATA(out);
    for (npy_intp i = 0; i < n; i++) {
        if (!(x[i] >= (double)lo && x[i] <= (double)INT_MAX) || x[i] != floor(x[i])) {
            value_error("%s[%zd]=%.17g is invalid: it must be an integer in %ld..%d", what, (Py_ssize_t)i, x[i],
                        lo, INT_MAX);
            Py_DECREF(d);
            Py_DECREF(out);
            return NULL;
        }
        y[i] = (int)x[i];
    }
    Py_DECREF(d);
    return out;
}

static PyArrayObject *new_vector(npy_intp n)
{
    return (PyArrayObject *)PyArray_SimpleNew(1, &n, NPY_DOUBLE);
}

/* dict[key] = obj, consuming the reference to obj; -1 with an exception on failure. */
static int dict_steal(PyObject *dict, const char *key, PyObject *obj)
{
    if (!obj)
        return -1;
    int rc = PyDict_SetItemString(dict, key, obj);
    Py_DECREF(obj);
    return rc;
}

/* Fills pot from (model name, params, curve); returns 0 or -1 with an exception set. */
static int parse_potential(const char *model_name, PyObject *params_obj, PyObject *curve_obj,
                           wkb_potential *pot)
{
    const wkb_model *model = wkb_model_by_name(model_name);
    const wkb_pointwise *curve = NULL;
    wkb_error err = {0};
    PyArrayObject *params = NULL;
    int rc = -1;

    if (!model) {
        PyErr_Format(PyExc_ValueError, "unknown potential model '%s'", model_name);
        return -1;
    }
    if (!(params = as_double_array(params_obj, "params", 1)))
        return -1;
    if ((size_t)PyArray_SIZE(params) != model->n_params) {
        PyErr_Format(PyExc_ValueError, "model %s takes %zu parameters, got %zd", model->name,
                     model->n_params, (Py_ssize_t)PyArray_SIZE(params));
        goto cleanup;
    }
    if (curve_obj && curve_obj != Py_None) {
        curve = PyCapsule_GetPointer(curve_obj, CURVE_CAPSULE);
        if (!curve)
            goto cleanup;
    }
    if (wkb_potential_init(pot, model, (const double *)PyArray_DATA(params), curve, &err)) {
        raise_status(&err);
        goto cleanup;
    }
    rc = 0;
cleanup:
    Py_XDECREF(params);
    return rc;
}

/* ---------------------------------------------------------------- potentials */

static PyObject *py_models(PyObject *self, PyObject *noargs)
{
    PyObject *d = PyDict_New();
    if (!d)
        return NULL;
    for (size_t i = 0; wkb_models[i]; i++) {
        const wkb_model *m = wkb_models[i];
        PyObject *names = PyTuple_New((Py_ssize_t)m->n_params);
        if (!names)
            goto fail;
        for (size_t k = 0; k < m->n_params; k++) {
            PyObject *s = PyUnicode_FromString(m->param_names[k]);
            if (!s) {
                Py_DECREF(names);
                goto fail;
            }
            PyTuple_SET_ITEM(names, (Py_ssize_t)k, s);
        }
        if (PyDict_SetItemString(d, m->name, names) < 0) {
            Py_DECREF(names);
            goto fail;
        }
        Py_DECREF(names);
    }
    return d;
fail:
    Py_DECREF(d);
    return NULL;
}

static PyObject *py_potential_values(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "r", "curve", NULL};
    const char *model_name;
    PyObject *params_obj, *r_obj, *curve_obj = Py_None;
    PyArrayObject *r = NULL, *V = NULL, *dV = NULL, *d2V = NULL, *depth = NULL;
    PyObject *result = NULL;
    wkb_potential pot;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOO|O", kwlist, &model_name, &params_obj, &r_obj,
                                     &curve_obj))
        return NULL;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (!(r = as_double_array(r_obj, "r", 1)))
        goto cleanup;
    const npy_intp n = PyArray_SIZE(r);
    if (!(V = new_vector(n)) || !(dV = new_vector(n)) || !(d2V = new_vector(n)) || !(depth = new_vector(n)))
        goto cleanup;
    {
        const double *rr = PyArray_DATA(r);
        double *pV = PyArray_DATA(V), *pdV = PyArray_DATA(dV), *pd2V = PyArray_DATA(d2V),
               *pdepth = PyArray_DATA(depth);
        Py_BEGIN_ALLOW_THREADS
        for (npy_intp i = 0; i < n; i++) {
            wkb_pot_value pv;
            wkb_potential_eval(&pot, rr[i], &pv);
            pV[i] = pv.V;
            pdV[i] = pv.dV;
            pd2V[i] = pv.d2V;
            pdepth[i] = pv.depth;
        }
        Py_END_ALLOW_THREADS
    }
    result = Py_BuildValue("(OOOO)", V, dV, d2V, depth);
cleanup:
    Py_XDECREF(r);
    Py_XDECREF(V);
    Py_XDECREF(dV);
    Py_XDECREF(d2V);
    Py_XDECREF(depth);
    return result;
}

static PyObject *py_param_derivatives(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "r", "curve", NULL};
    const char *model_name;
    PyObject *params_obj, *r_obj, *curve_obj = Py_None;
    PyArrayObject *r = NULL, *out = NULL;
    wkb_potential pot;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOO|O", kwlist, &model_name, &params_obj, &r_obj,
                                     &curve_obj))
        return NULL;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (!(r = as_double_array(r_obj, "r", 1)))
        return NULL;
    const npy_intp n = PyArray_SIZE(r);
    const size_t np = pot.model->n_params;
    npy_intp dims[2] = {n, (npy_intp)np};
    out = (PyArrayObject *)PyArray_ZEROS(2, dims, NPY_DOUBLE, 0);
    if (out && np > 0 && pot.model->param_derivs) {
        const double *rr = PyArray_DATA(r);
        double *po = PyArray_DATA(out);
        Py_BEGIN_ALLOW_THREADS
        for (npy_intp i = 0; i < n; i++)
            pot.model->param_derivs(&pot, rr[i], po + i * np);
        Py_END_ALLOW_THREADS
    }
    Py_DECREF(r);
    return (PyObject *)out;
}

/* ---------------------------------------------------------------- point-wise curves */

static void curve_destructor(PyObject *capsule)
{
    wkb_pointwise_free(PyCapsule_GetPointer(capsule, CURVE_CAPSULE));
}

static PyObject *py_pointwise_build(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"r", "V", "asymptote", "tail_power", "inner_wall", NULL};
    PyObject *r_obj, *V_obj;
    double asymptote = NAN, tail_power = NAN;
    int inner_wall = WKB_WALL_EXPONENTIAL;
    PyArrayObject *r = NULL, *V = NULL;
    PyObject *result = NULL, *capsule = NULL;
    wkb_pointwise *curve = NULL;
    wkb_error err = {0};
    int status;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "OO|ddi", kwlist, &r_obj, &V_obj, &asymptote, &tail_power,
                                     &inner_wall))
        return NULL;
    if (!(r = as_double_array(r_obj, "r", 1)) || !(V = as_double_array(V_obj, "V", 1)))
        goto cleanup;
    if (PyArray_SIZE(r) != PyArray_SIZE(V)) {
        PyErr_Format(PyExc_ValueError, "r and V must have the same length, got %zd and %zd",
                     (Py_ssize_t)PyArray_SIZE(r), (Py_ssize_t)PyArray_SIZE(V));
        goto cleanup;
    }
    Py_BEGIN_ALLOW_THREADS
    status = wkb_pointwise_alloc_wall(PyArray_DATA(r), PyArray_DATA(V), (size_t)PyArray_SIZE(r), asymptote,
                                      tail_power, inner_wall, &curve, &err);
    Py_END_ALLOW_THREADS
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (!(capsule = PyCapsule_New(curve, CURVE_CAPSULE, curve_destructor))) {
        wkb_pointwise_free(curve);
        goto cleanup;
    }
    {
        double D, n, Cn, A, B, C;
        int form;
        wkb_pointwise_tail(curve, &D, &n, &Cn);
        wkb_pointwise_wall(curve, &form, &A, &B, &C);
        result = Py_BuildValue("(Oddd(iddd))", capsule, D, n, Cn, form, A, B, C);
    }
cleanup:
    Py_XDECREF(capsule);
    Py_XDECREF(r);
    Py_XDECREF(V);
    return result;
}

/* ---------------------------------------------------------------- Airy functions */

/* A new double array with the shape of like; NULL with an exception. */
static PyArrayObject *new_like(PyArrayObject *like)
{
    return (PyArrayObject *)PyArray_SimpleNew(PyArray_NDIM(like), PyArray_DIMS(like), NPY_DOUBLE);
}

static PyObject *py_airy(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"z", "errors", NULL};
    PyObject *z_obj, *result = NULL;
    int with_errors = 0, status = WKB_SUCCESS;
    PyArrayObject *z = NULL, *out[8] = {NULL};
    wkb_error err = {0};

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "O|p", kwlist, &z_obj, &with_errors))
        return NULL;
    if (!(z = as_double_array(z_obj, "z", -1)))
        return NULL;
    for (int k = 0; k < 8; k++)
        if (!(out[k] = new_like(z)))
            goto cleanup;
    {
        const npy_intp n = PyArray_SIZE(z);
        const double *zz = PyArray_DATA(z);
        double *p[8];
        for (int k = 0; k < 8; k++)
            p[k] = PyArray_DATA(out[k]);
        Py_BEGIN_ALLOW_THREADS
        for (npy_intp i = 0; i < n && status == WKB_SUCCESS; i++) {
            wkb_airy_values a;
            status = wkb_airy(zz[i], &a, &err);
            p[0][i] = a.Ai, p[1][i] = a.dAi, p[2][i] = a.Bi, p[3][i] = a.dBi;
            p[4][i] = a.Ai_err, p[5][i] = a.dAi_err, p[6][i] = a.Bi_err, p[7][i] = a.dBi_err;
        }
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (with_errors)
        result = Py_BuildValue("((OOOO)(OOOO))", out[0], out[1], out[2], out[3], out[4], out[5], out[6], out[7]);
    else
        result = Py_BuildValue("(OOOO)", out[0], out[1], out[2], out[3]);
cleanup:
    Py_XDECREF(z);
    for (int k = 0; k < 8; k++)
        Py_XDECREF(out[k]);
    return result;
}

static PyObject *py_airy_asymptotic(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"z", "terms", NULL};
    PyObject *z_obj;
    int terms, status = WKB_SUCCESS;
    PyArrayObject *z = NULL, *ai = NULL;
    wkb_error err = {0};

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "Oi", kwlist, &z_obj, &terms))
        return NULL;
    if (!(z = as_double_array(z_obj, "z", -1)))
        return NULL;
    if (!(ai = new_like(z)))
        goto cleanup;
    {
        const npy_intp n = PyArray_SIZE(z);
        const double *zz = PyArray_DATA(z);
        double *pa = PyArray_DATA(ai);
        Py_BEGIN_ALLOW_THREADS
        for (npy_intp i = 0; i < n && status == WKB_SUCCESS; i++)
            status = wkb_airy_asymptotic(zz[i], terms, &pa[i], &err);
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        Py_CLEAR(ai);
    }
cleanup:
    Py_XDECREF(z);
    return (PyObject *)ai;
}


/* ---------------------------------------------------------------- matched end phases */

/* The matched rule at one energy: both end phases and the continuous quantum number at binding
   energy b, for tests and diagnostics. r_match <= 0 uses the fraction. */
/* milne: 0 the earlier end solve, 1 (default) Magnus steps, 2 rk8pd through the turning region */
static int milne_ok(int milne)
{
    if (milne >= 0 && milne <= 2)
        return 1;
    PyErr_Format(PyExc_ValueError, "milne=%d is invalid: 1 (the default end solve), 2 (rk8pd through the turning "
                 "region) or 0 (the earlier Pruefer solve)", milne);
    return 0;
}

static PyObject *py_matched_phases(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "mu", "rot", "binding", "match_fraction", "r_match_inner",
                             "r_match_outer", "milne", NULL};
    const char *model_name;
    PyObject *params_obj, *curve_obj;
    double mu, rot, binding, fraction = WKB_MATCH_FRACTION, rm_in = 0, rm_out = 0, vq = NAN;
    int milne = 1;
    wkb_potential pot;
    wkb_error err = {0};
    wkb_end_phase ph[2];
    int status;
    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOddd|dddi", kwlist, &model_name, &params_obj, &curve_obj, &mu,
                                     &rot, &binding, &fraction, &rm_in, &rm_out, &milne) || !milne_ok(milne))
        return NULL;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    wkb_settings settings = wkb_default_settings();
    settings.ends = WKB_ENDS_MATCHED;
    settings.match_fraction = fraction;
    settings.match_milne = milne;
    wkb_well *w = wkb_well_alloc(&settings);
    if (!w)
        return value_error("match_fraction=%g is invalid: give a value in 0.05..0.95", fraction);
    Py_BEGIN_ALLOW_THREADS
    status = wkb_well_set(w, &pot, mu, rot, 1, 1, &err);
    if (!status)
        status = wkb_matched_end_phase(w, binding, 0, rm_in, &ph[0], &err);
    if (!status)
        status = wkb_matched_end_phase(w, binding, 1, rm_out, &ph[1], &err);
    if (!status && rm_in <= 0 && rm_out <= 0)
        status = wkb_matched_quantum_number(w, binding, &vq, &err);
    Py_END_ALLOW_THREADS
    wkb_well_free(w);
    if (status)
        return raise_status(&err);
    return Py_BuildValue("{s:d,s:d,s:d,s:d,s:d,s:d,s:d,s:d,s:d,s:n,s:n}", "psi_inner", ph[0].psi, "psi_outer",
                         ph[1].psi, "r_match_inner", ph[0].r_match, "r_match_outer", ph[1].r_match, "r_inner",
                         ph[0].r_turn, "r_outer", ph[1].r_turn, "action_inner", ph[0].action_to_turn,
                         "action_outer", ph[1].action_to_turn, "v", vq, "evaluations_inner",
                         (Py_ssize_t)ph[0].evaluations, "evaluations_outer", (Py_ssize_t)ph[1].evaluations);
}

/* ---------------------------------------------------------------- WKB levels */

/* Levels for one or several rotational factors rot (J(J+1) or (J+1/2)^2) in one crossing:
   all bound levels of each (v=None) or the listed v for each. Columns are concatenated in rot order;
   rot_index says which rot a row belongs to. */
/* The level columns as one read-only (9, n) block, rows in the order of the dict form's names (v, energy,
   binding_energy, inner and outer turning points, Bv, dEdv, error, rule code), returned as the tuple
   (block, rot_index, vD, v_th, count, finite): vD, v_th and count as in the dict form; finite is True
   when every energy, binding energy, inner turning point, Bv, dEdv and error is finite (the caller's
   check of the results, done here at no cost). A small call then costs no dict of interned names. */
static PyObject *packed_levels(const wkb_level *lv, size_t n, PyArrayObject *index, PyArrayObject *vD_arr,
                               PyArrayObject *vth_arr, PyArrayObject *count_arr, int scalar_rot)
{
    npy_intp dims[2] = {9, (npy_intp)n};
    PyArrayObject *block = (PyArrayObject *)PyArray_SimpleNew(2, dims, NPY_DOUBLE);
    if (!block)
        return NULL;
    double *p = PyArray_DATA(block);
    int finite = 1;
    for (size_t i = 0; i < n; i++) {
        const wkb_level *L = &lv[i];
        const double vals[9] = {L->v, L->energy, L->binding, L->r_inner, L->r_outer, L->Bv, L->dEdv, L->error,
                                (double)L->rule};
        for (int c = 0; c < 9; c++)
            p[(size_t)c * n + i] = vals[c];
        finite = finite && isfinite(L->energy) && isfinite(L->binding) && isfinite(L->r_inner) &&
                 isfinite(L->Bv) && isfinite(L->dEdv) && isfinite(L->error);
    }
    PyArray_CLEARFLAGS(block, NPY_ARRAY_WRITEABLE);
    if (scalar_rot)
        return Py_BuildValue("(NOddnO)", block, index, ((double *)PyArray_DATA(vD_arr))[0],
                             ((double *)PyArray_DATA(vth_arr))[0], ((npy_intp *)PyArray_DATA(count_arr))[0],
                             finite ? Py_True : Py_False);
    return Py_BuildValue("(NOOOOO)", block, index, vD_arr, vth_arr, count_arr, finite ? Py_True : Py_False);
}

static PyObject *py_wkb_levels(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "mu", "rot", "v", "maslov_in", "maslov_out",
                             "want_dVdp", "order", "ends", "match_fraction", "nodes", "match_rule",
                             "max_levels", "milne", "packed", NULL};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *rot_obj, *v_obj = Py_None;
    double mu, match_fraction = WKB_MATCH_FRACTION;
    int maslov_in = 1, maslov_out = 1, want_dVdp = 0, order = 1, ends = WKB_ENDS_MASLOV, nodes = 0, match_rule = 0, milne = 1;
    int packed = 0; /* the small call's form: a tuple and one (9, n) block instead of a dict of columns */
    Py_ssize_t max_levels = 1000000; /* work limit: levels in one call (the caller may raise it) */
    PyArrayObject *vth_arr = NULL;
    PyArrayObject *rot_arr = NULL, *v_arr = NULL, *dVdp = NULL, *vD_arr = NULL, *count_arr = NULL, *index = NULL;
    PyArrayObject *cols[9] = {NULL};
    static const char *names[9] = {"v", "energy", "binding_energy", "inner_turning_point",
                                   "outer_turning_point", "Bv", "dEdv", "error", "rule"};
    PyObject *result = NULL;
    wkb_potential pot;
    wkb_well **wells = NULL; /* one set-up well per rotational factor, kept between the two passes */
    wkb_level *lv = NULL;
    wkb_error err = {0};
    size_t n = 0;
    npy_intp n_rot = 0;
    int status = WKB_SUCCESS;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOdO|Oiipiidiinip", kwlist, &model_name, &params_obj, &curve_obj,
                                     &mu, &rot_obj, &v_obj, &maslov_in, &maslov_out, &want_dVdp, &order, &ends,
                                     &match_fraction, &nodes, &match_rule, &max_levels, &milne, &packed) ||
        !milne_ok(milne))
        return NULL;
    if (nodes != 0 && (nodes < 8 || nodes > 512 || nodes % 2)) {
        PyErr_Format(PyExc_ValueError, "nodes=%d is invalid: an even number of quadrature nodes in 8..512", nodes);
        return NULL;
    }
    if (packed && want_dVdp)
        return value_error("packed=True does not carry dE_dp: leave out want_dVdp or packed");
    if (ends != WKB_ENDS_MASLOV && ends != WKB_ENDS_MATCHED) {
        PyErr_Format(PyExc_ValueError, "ends=%d is invalid: 0 (fixed Maslov phases) or 1 (matched)", ends);
        return NULL;
    }
    if (!(match_fraction >= 0.05 && match_fraction <= 0.95))
        return value_error("match_fraction=%g is invalid: give a value in 0.05..0.95", match_fraction);
    if (order != 1 && order != 2) {
        PyErr_Format(PyExc_ValueError, "order=%d is invalid: use 1 (first-order WKB) or 2 (with the second-order term)",
                     order);
        return NULL;
    }
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    const int scalar_rot = PyFloat_Check(rot_obj) || PyLong_Check(rot_obj);
    if (!(rot_arr = (PyArrayObject *)PyArray_FROM_OTF(rot_obj, NPY_DOUBLE, NPY_ARRAY_IN_ARRAY)))
        goto cleanup;
    if (PyArray_NDIM(rot_arr) > 1) {
        PyErr_SetString(PyExc_ValueError, "rot must be a number or a 1-dimensional array");
        goto cleanup;
    }
    if (v_obj != Py_None) {
        v_arr = as_checked_int_array(v_obj, "v", 0);
        if (!v_arr)
            goto cleanup;
        if (PyArray_NDIM(v_arr) != 1) {
            PyErr_SetString(PyExc_ValueError, "v must be a 1-dimensional array of integers");
            goto cleanup;
        }
    }
    n_rot = PyArray_SIZE(rot_arr);
    if (!(vD_arr = new_vector(n_rot)) || !(vth_arr = new_vector(n_rot)) ||
        !(count_arr = (PyArrayObject *)PyArray_SimpleNew(1, (npy_intp[]){n_rot}, NPY_INTP)))
        goto cleanup;
    {
        wkb_settings settings = wkb_default_settings();
        settings.order = order;
        settings.ends = ends;
        settings.match_fraction = match_fraction;
        if (nodes)
            settings.nodes = (size_t)nodes;
        settings.check_nodes = nodes == 0; /* the default rule, refined per well where it is not converged */
        if (match_rule != 0 && match_rule != WKB_RULE_MATCHED && match_rule != WKB_RULE_ACROSS) {
            PyErr_Format(PyExc_ValueError, "match_rule=%d is invalid: 0 (choose), 3 (matched) or 4 (exact phase)",
                         match_rule);
            goto cleanup;
        }
        settings.match_rule = match_rule;
        settings.match_milne = milne;
        if (!(wells = calloc((size_t)n_rot + 1, sizeof *wells))) {
            PyErr_NoMemory();
            goto cleanup;
        }
        for (npy_intp k = 0; k < n_rot; k++)
            if (!(wells[k] = wkb_well_alloc(&settings))) {
                PyErr_NoMemory();
                goto cleanup;
            }
    }
    const double *rot = PyArray_DATA(rot_arr);
    double *vD = PyArray_DATA(vD_arr);
    npy_intp *count = PyArray_DATA(count_arr);
    /* levels asked for by number: below v_end (the matched rule then skips its threshold work when
       they all lie deep in the well; v_th is NaN and the caller computes it when asked) */
    size_t v_end = 0;
    if (v_arr) {
        const int *vv = PyArray_DATA(v_arr);
        for (npy_intp i = 0; i < PyArray_SIZE(v_arr); i++)
            if ((size_t)vv[i] + 1 > v_end)
                v_end = (size_t)vv[i] + 1;
    }
    /* first pass: the number of levels of each well */
    Py_BEGIN_ALLOW_THREADS
    for (npy_intp k = 0; k < n_rot && !status; k++) {
        size_t c = 0;
        status = wkb_well_set(wells[k], &pot, mu, rot[k], maslov_in, maslov_out, &err);
        if (!status)
            wkb_well_request_below(wells[k], v_end);
        if (!status)
            status = wkb_level_count(wells[k], &c, &vD[k], &err);
        ((double *)PyArray_DATA(vth_arr))[k] = NAN;
        if (!status && ends == WKB_ENDS_MATCHED && !wkb_threshold_deferred(wells[k]))
            status = wkb_threshold_number(wells[k], (double *)PyArray_DATA(vth_arr) + k, &err);
        count[k] = (npy_intp)c;
        n += v_arr ? (size_t)PyArray_SIZE(v_arr) : c;
    }
    Py_END_ALLOW_THREADS
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    for (npy_intp k = 0; k < n_rot; k++) {
        /* an inner wall lower than the asymptote (V(0) < De): the levels between its top and the
           asymptote are not bound by the potential, and vD is not defined */
        const double top = wkb_well_top(wells[k]), wall = wkb_well_bound_top(wells[k]);
        if (!(wall < top - 1e-6 * (top - wkb_well_bottom(wells[k]))))
            continue;
        vD[k] = NAN;
        if (!v_arr) {
            value_error("the inner wall of this potential%s rises only to %.10g cm-1, below the asymptote %.10g "
                        "cm-1: the levels above the wall top are not bound by the potential (the exact solver "
                        "binds them only through its boundary at r = 0), so there is no complete set of levels "
                        "and no vD. The %zu levels below the wall top can be asked for by v (v=0..%zu)",
                        rot[k] > 0 ? " (with this rotation)" : "", wall, top, (size_t)count[k],
                        count[k] > 0 ? (size_t)count[k] - 1 : 0);
            goto cleanup;
        }
    }
    if (max_levels >= 0 && n > (size_t)max_levels) {
        /* refused before the work: millions of levels (e.g. from a huge reduced mass) take minutes */
        PyErr_Format(PyExc_ValueError,
                     "this call would compute %zu levels, more than the limit max_levels=%zd: ask for fewer "
                     "(a list of v, fewer J values, a smaller reduced mass) or raise max_levels",
                     n, max_levels);
        goto cleanup;
    }
    if (n && !(lv = calloc(n, sizeof *lv))) {
        PyErr_NoMemory();
        goto cleanup;
    }
    const size_t np = pot.model->n_params;
    if (want_dVdp) {
        npy_intp dims[2] = {(npy_intp)n, (npy_intp)np};
        if (!(dVdp = (PyArrayObject *)PyArray_ZEROS(2, dims, NPY_DOUBLE, 0)))
            goto cleanup;
    }
    if (!(index = (PyArrayObject *)PyArray_SimpleNew(1, (npy_intp[]){(npy_intp)n}, NPY_INTP)))
        goto cleanup;
    /* second pass: the levels */
    {
        const int *vv = v_arr ? (const int *)PyArray_DATA(v_arr) : NULL;
        double *pd = dVdp ? (double *)PyArray_DATA(dVdp) : NULL;
        npy_intp *pi = PyArray_DATA(index);
        Py_BEGIN_ALLOW_THREADS
        size_t row = 0;
        for (npy_intp k = 0; k < n_rot && !status; k++) {
            const size_t m = vv ? (size_t)PyArray_SIZE(v_arr) : (size_t)count[k];
            size_t c;
            wkb_well *w = wells[k];
            if (!vv && !pd) {
                status = wkb_all_levels(w, lv + row, m, &c, NULL, &err);
            } else {
                for (size_t i = 0; i < m && !status; i++)
                    status = wkb_level_at(w, vv ? vv[i] : (int)i, &lv[row + i], pd ? pd + (row + i) * np : NULL,
                                          &err);
            }
            for (size_t i = 0; i < m; i++)
                pi[row + i] = k;
            row += m;
        }
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (packed) {
        result = packed_levels(lv, n, index, vD_arr, vth_arr, count_arr, scalar_rot);
        goto cleanup;
    }
    for (int c = 0; c < 9; c++) {
        if (!(cols[c] = new_vector((npy_intp)n)))
            goto cleanup;
        double *p = PyArray_DATA(cols[c]);
        for (size_t i = 0; i < n; i++) {
            const wkb_level *L = &lv[i];
            const double vals[9] = {L->v, L->energy, L->binding, L->r_inner, L->r_outer, L->Bv, L->dEdv, L->error,
                                    (double)L->rule};
            p[i] = vals[c];
        }
    }
    if (!(result = PyDict_New()))
        goto cleanup;
    for (int c = 0; c < 9; c++)
        if (PyDict_SetItemString(result, names[c], (PyObject *)cols[c]) < 0)
            goto fail;
    if (PyDict_SetItemString(result, "rot_index", (PyObject *)index) < 0)
        goto fail;
    if (scalar_rot) {
        if (dict_steal(result, "vD", PyFloat_FromDouble(vD[0])) < 0 ||
            dict_steal(result, "v_th", PyFloat_FromDouble(((double *)PyArray_DATA(vth_arr))[0])) < 0 ||
            dict_steal(result, "count", PyLong_FromSsize_t(count[0])) < 0)
            goto fail;
    } else if (PyDict_SetItemString(result, "vD", (PyObject *)vD_arr) < 0 ||
               PyDict_SetItemString(result, "v_th", (PyObject *)vth_arr) < 0 ||
               PyDict_SetItemString(result, "count", (PyObject *)count_arr) < 0) {
        goto fail;
    }
    if (dVdp && PyDict_SetItemString(result, "dE_dp", (PyObject *)dVdp) < 0)
        goto fail;
    goto cleanup;
fail:
    Py_CLEAR(result);
cleanup:
    for (int c = 0; c < 9; c++)
        Py_XDECREF(cols[c]);
    Py_XDECREF(dVdp);
    Py_XDECREF(v_arr);
    Py_XDECREF(rot_arr);
    Py_XDECREF(vD_arr);
    Py_XDECREF(vth_arr);
    Py_XDECREF(count_arr);
    Py_XDECREF(index);
    free(lv);
    if (wells)
        for (npy_intp k = 0; k < n_rot; k++)
            wkb_well_free(wells[k]);
    free(wells);
    return result;
}

static PyObject *py_wkb_orbits(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "mu", "rot", "binding", NULL};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *b_obj;
    double mu, rot;
    PyArrayObject *b = NULL;
    PyArrayObject *cols[5] = {NULL};
    PyObject *result = NULL;
    wkb_potential pot;
    wkb_well *w = NULL;
    wkb_error err = {0};
    int status = WKB_SUCCESS;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOddO", kwlist, &model_name, &params_obj, &curve_obj, &mu,
                                     &rot, &b_obj))
        return NULL;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (!(b = as_double_array(b_obj, "binding", 1)))
        return NULL;
    const npy_intp n = PyArray_SIZE(b);
    for (int c = 0; c < 5; c++)
        if (!(cols[c] = new_vector(n)))
            goto cleanup;
    wkb_settings settings = wkb_default_settings();
    settings.check_nodes = 1; /* the rule refined where this well needs it, as for the levels */
    if (!(w = wkb_well_alloc(&settings))) {
        PyErr_NoMemory();
        goto cleanup;
    }
    {
        const double *pb = PyArray_DATA(b);
        double *out[5];
        for (int c = 0; c < 5; c++)
            out[c] = PyArray_DATA(cols[c]);
        Py_BEGIN_ALLOW_THREADS
        status = wkb_well_set(w, &pot, mu, rot, 1, 1, &err);
        for (npy_intp i = 0; i < n && !status; i++) {
            wkb_orbit o;
            status = wkb_orbit_at(w, pb[i], &o, NULL, &err);
            out[0][i] = o.action;
            out[1][i] = o.half_period;
            out[2][i] = o.r_inner;
            out[3][i] = o.r_outer;
            out[4][i] = o.Bv;
        }
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    result = Py_BuildValue("{sOsOsOsOsO}", "action", cols[0], "half_period", cols[1], "inner_turning_point",
                           cols[2], "outer_turning_point", cols[3], "Bv", cols[4]);
cleanup:
    for (int c = 0; c < 5; c++)
        Py_XDECREF(cols[c]);
    Py_XDECREF(b);
    wkb_well_free(w);
    return result;
}

/* ------------------------------------------------- quasibound levels (quasibound.c, resonance.c) */

#define QB_NCOL 17
#define QB_NRANGE 8
static PyObject *py_quasibound_levels(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "mu", "rot", "order", "width_form", "barrier_phase",
                             "width_phase", "complex_position", "barrier_match_theta", "join_distance", NULL};
    static const char *names[QB_NCOL] = {"v", "rot_index", "energy", "above_asymptote", "width", "theta", "dEdv",
                                         "Bv", "error", "inner_turning_point", "outer_turning_point",
                                         "barrier_turning_point", "order", "dtheta_dE",
                                         "width_spacing", "complex_root", "barrier_matched"};
    static const char *range_names[QB_NRANGE] = {"barrier_found", "barrier_top", "barrier_height", "barrier_r",
                                                 "v_first", "v_top", "first_order_fallback",
                                                 "barrier_match_fallback"};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *rot_obj, *result = NULL;
    double mu;
    int order = 2, width_form = WKB_WIDTH_UNIFORM, barrier_phase = 1, width_phase = 1, complex_position = 1;
    PyArrayObject *rot_arr = NULL, *cols[QB_NCOL] = {NULL}, *rcols[QB_NRANGE] = {NULL};
    wkb_qb_settings settings = wkb_qb_default_settings();
    wkb_potential pot;
    wkb_qb *q = NULL;
    wkb_qb_level *lv = NULL;
    wkb_error err = {0};
    int status = WKB_SUCCESS;
    size_t total = 0;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOdO|iipppdd", kwlist, &model_name, &params_obj, &curve_obj, &mu,
                                     &rot_obj, &order, &width_form, &barrier_phase, &width_phase,
                                     &complex_position, &settings.barrier_match_theta, &settings.join_distance))
        return NULL;
    if (!(settings.barrier_match_theta >= 0) || !(isfinite(settings.join_distance) && settings.join_distance > 0)) {
        value_error("barrier_match_theta=%g / join_distance=%g are invalid (theta >= 0, inf allowed; distance a "
                    "finite number > 0, A)", settings.barrier_match_theta, settings.join_distance);
        return NULL;
    }
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (!(rot_arr = as_double_array(rot_obj, "rot", 1)))
        return NULL;
    const npy_intp n_rot = PyArray_SIZE(rot_arr);
    const double *rot = PyArray_DATA(rot_arr);
    settings.order = order;
    settings.width_form = width_form;
    settings.barrier_phase = barrier_phase;
    settings.width_phase = width_phase;
    settings.complex_position = complex_position;
    if (!(q = wkb_qb_alloc(&settings))) {
        value_error("order=%d / width_form=%d are invalid (order 1 or 2; width form 0 uniform, 1 Kemble)", order,
                    width_form);
        goto cleanup;
    }
    for (int c = 0; c < QB_NRANGE; c++)
        if (!(rcols[c] = new_vector(n_rot)))
            goto cleanup;
    {
        double *rc[QB_NRANGE];
        for (int c = 0; c < QB_NRANGE; c++)
            rc[c] = PyArray_DATA(rcols[c]);
        /* first pass: how many levels each J has */
        Py_BEGIN_ALLOW_THREADS
        for (npy_intp k = 0; k < n_rot && !status; k++) {
            size_t c = 0;
            wkb_qb_range range;
            status = wkb_qb_set(q, &pot, mu, rot[k], &err);
            if (!status)
                status = wkb_qb_count(q, &c, &range, &err);
            total += c;
        }
        Py_END_ALLOW_THREADS
        if (status) {
            raise_status(&err);
            goto cleanup;
        }
        if (!(lv = calloc(total + 1, sizeof *lv))) {
            PyErr_NoMemory();
            goto cleanup;
        }
        for (int c = 0; c < QB_NCOL; c++)
            if (!(cols[c] = new_vector((npy_intp)total)))
                goto cleanup;
        double *out[QB_NCOL];
        for (int c = 0; c < QB_NCOL; c++)
            out[c] = PyArray_DATA(cols[c]);
        Py_BEGIN_ALLOW_THREADS
        size_t row = 0;
        for (npy_intp k = 0; k < n_rot && !status; k++) {
            size_t c = 0;
            wkb_qb_range range;
            status = wkb_qb_set(q, &pot, mu, rot[k], &err);
            if (!status)
                status = wkb_qb_levels(q, lv + row, total - row, &c, &range, &err);
            if (status)
                break;
            rc[0][k] = range.barrier.found;
            rc[1][k] = range.barrier.found ? range.barrier.top : NAN;
            rc[2][k] = range.barrier.found ? range.barrier.height : NAN;
            rc[3][k] = range.barrier.found ? range.barrier.r_top : NAN;
            rc[4][k] = range.v_first;
            rc[5][k] = range.v_top;
            rc[6][k] = (double)range.n_first_order_fallback;
            rc[7][k] = (double)range.n_barrier_match_fallback;
            for (size_t i = 0; i < c && row + i < total; i++) {
                const wkb_qb_level *L = &lv[row + i];
                const double vals[QB_NCOL] = {L->v, (double)k, L->energy, L->above_asymptote, L->width, L->theta,
                                              L->dEdv, L->Bv, L->error, L->r1, L->r2, L->r3, L->order,
                                              L->dtheta_dE, L->width_spacing, L->complex_root,
                                              L->barrier_matched};
                for (int cc = 0; cc < QB_NCOL; cc++)
                    out[cc][row + i] = vals[cc];
            }
            row += c;
        }
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (!(result = PyDict_New()))
        goto cleanup;
    for (int c = 0; c < QB_NCOL; c++)
        if (PyDict_SetItemString(result, names[c], (PyObject *)cols[c]) < 0)
            goto fail;
    for (int c = 0; c < QB_NRANGE; c++)
        if (PyDict_SetItemString(result, range_names[c], (PyObject *)rcols[c]) < 0)
            goto fail;
    goto cleanup;
fail:
    Py_CLEAR(result);
cleanup:
    for (int c = 0; c < QB_NCOL; c++)
        Py_XDECREF(cols[c]);
    for (int c = 0; c < QB_NRANGE; c++)
        Py_XDECREF(rcols[c]);
    Py_XDECREF(rot_arr);
    free(lv);
    wkb_qb_free(q);
    return result;
}

static PyObject *py_barrier_integrals(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "mu", "rot", "energy", NULL};
    static const char *names[8] = {"theta", "dtheta_dE", "action", "half_period", "inner_turning_point",
                                   "outer_turning_point", "barrier_turning_point", "curvature_integral"};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *E_obj, *result = NULL;
    double mu, rot;
    PyArrayObject *E_arr = NULL, *cols[8] = {NULL};
    wkb_potential pot;
    wkb_qb *q = NULL;
    wkb_error err = {0};
    int status = WKB_SUCCESS;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOddO", kwlist, &model_name, &params_obj, &curve_obj, &mu, &rot,
                                     &E_obj))
        return NULL;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (!(E_arr = as_double_array(E_obj, "energy", 1)))
        return NULL;
    const npy_intp n = PyArray_SIZE(E_arr);
    if (!(q = wkb_qb_alloc(NULL))) {
        PyErr_NoMemory();
        goto cleanup;
    }
    for (int c = 0; c < 8; c++)
        if (!(cols[c] = new_vector(n)))
            goto cleanup;
    {
        const double *E = PyArray_DATA(E_arr);
        double *out[8];
        for (int c = 0; c < 8; c++)
            out[c] = PyArray_DATA(cols[c]);
        Py_BEGIN_ALLOW_THREADS
        status = wkb_qb_set(q, &pot, mu, rot, &err);
        for (npy_intp i = 0; i < n && !status; i++) {
            wkb_qb_orbit_values o;
            status = wkb_qb_orbit(q, E[i] - wkb_qb_barrier(q)->asymptote, &o, &err);
            const double vals[8] = {o.theta, o.dtheta_dE, o.action, o.half_period, o.r1, o.r2, o.r3,
                                     o.curvature_integral};
            for (int c = 0; c < 8; c++)
                out[c][i] = vals[c];
        }
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (!(result = PyDict_New()))
        goto cleanup;
    for (int c = 0; c < 8; c++)
        if (PyDict_SetItemString(result, names[c], (PyObject *)cols[c]) < 0) {
            Py_CLEAR(result);
            break;
        }
cleanup:
    for (int c = 0; c < 8; c++)
        Py_XDECREF(cols[c]);
    Py_XDECREF(E_arr);
    wkb_qb_free(q);
    return result;
}

static PyObject *py_resonances(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "mu", "J", "energy", "width", "phase_step", "r_match",
                             NULL};
    static const char *names[7] = {"energy", "width", "energy_error", "width_error", "r_match", "grid_points",
                                   "above_barrier"};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *J_obj, *E_obj, *G_obj, *result = NULL;
    double mu;
    wkb_resonance_settings settings = wkb_resonance_default_settings();
    PyArrayObject *J_arr = NULL, *E_arr = NULL, *G_arr = NULL, *cols[7] = {NULL};
    wkb_potential pot;
    wkb_res *w = NULL;
    wkb_error err = {0};
    int status = WKB_SUCCESS;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOdOOO|dd", kwlist, &model_name, &params_obj, &curve_obj, &mu,
                                     &J_obj, &E_obj, &G_obj, &settings.phase_step, &settings.r_match))
        return NULL;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (!(J_arr = (PyArrayObject *)PyArray_FROM_OTF(J_obj, NPY_INT, NPY_ARRAY_IN_ARRAY)) ||
        !(E_arr = as_double_array(E_obj, "energy", 1)) || !(G_arr = as_double_array(G_obj, "width", 1)))
        goto cleanup;
    const npy_intp n = PyArray_SIZE(E_arr);
    if (PyArray_NDIM(J_arr) != 1 || PyArray_SIZE(J_arr) != n || PyArray_SIZE(G_arr) != n) {
        value_error("J, energy and width must be 1-dimensional arrays of one length");
        goto cleanup;
    }
    if (!(w = wkb_res_alloc(&settings))) {
        value_error("resonance settings phase_step=%g, r_match=%g are invalid (0 < phase_step <= 0.5, r_match > 0)",
                    settings.phase_step, settings.r_match);
        goto cleanup;
    }
    for (int c = 0; c < 7; c++)
        if (!(cols[c] = new_vector(n)))
            goto cleanup;
    {
        const int *J = PyArray_DATA(J_arr);
        const double *E = PyArray_DATA(E_arr), *G = PyArray_DATA(G_arr);
        double *out[7];
        for (int c = 0; c < 7; c++)
            out[c] = PyArray_DATA(cols[c]);
        Py_BEGIN_ALLOW_THREADS
        for (npy_intp i = 0; i < n && !status; i++) {
            wkb_resonance res;
            status = wkb_res_find(w, &pot, mu, J[i], E[i], G[i], &res, &err);
            const double vals[7] = {res.energy, res.width, res.energy_error, res.width_error, res.r_match,
                                    (double)res.grid_points, res.above_barrier};
            for (int c = 0; c < 7; c++)
                out[c][i] = vals[c];
        }
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (!(result = PyDict_New()))
        goto cleanup;
    for (int c = 0; c < 7; c++)
        if (PyDict_SetItemString(result, names[c], (PyObject *)cols[c]) < 0) {
            Py_CLEAR(result);
            break;
        }
cleanup:
    for (int c = 0; c < 7; c++)
        Py_XDECREF(cols[c]);
    Py_XDECREF(J_arr);
    Py_XDECREF(E_arr);
    Py_XDECREF(G_arr);
    wkb_res_free(w);
    return result;
}

/* ---------------------------------------------------------------- fits (fit.c) */

/* The level arrays of a fit: v (int), rot, mu [, energy, sigma], all of one length n. */
typedef struct {
    PyArrayObject *v, *rot, *mu, *energy, *sigma;
} fit_arrays;

static void fit_arrays_release(fit_arrays *a)
{
    Py_XDECREF(a->v);
    Py_XDECREF(a->rot);
    Py_XDECREF(a->mu);
    Py_XDECREF(a->energy);
    Py_XDECREF(a->sigma);
}

/* Converts and checks the arrays; fills data. Returns 0 or -1 with an exception. */
static int parse_fit_arrays(PyObject *v_obj, PyObject *rot_obj, PyObject *mu_obj, PyObject *energy_obj,
                            PyObject *sigma_obj, int energy_zero, fit_arrays *a, wkb_fit_data *data)
{
    memset(data, 0, sizeof *data);
    a->v = as_checked_int_array(v_obj, "v", 0);
    if (!a->v)
        return -1;
    if (PyArray_NDIM(a->v) != 1) {
        PyErr_SetString(PyExc_ValueError, "v must be a 1-dimensional array of integers");
        return -1;
    }
    const npy_intp n = PyArray_SIZE(a->v);
    if (!(a->rot = as_double_array(rot_obj, "rot", 1)) || !(a->mu = as_double_array(mu_obj, "mu", 1)))
        return -1;
    if (energy_obj && !(a->energy = as_double_array(energy_obj, "energy", 1)))
        return -1;
    if (sigma_obj && !(a->sigma = as_double_array(sigma_obj, "sigma", 1)))
        return -1;
    PyArrayObject *all[4] = {a->rot, a->mu, a->energy, a->sigma};
    static const char *names[4] = {"rot", "mu", "energy", "sigma"};
    for (int k = 0; k < 4; k++)
        if (all[k] && PyArray_SIZE(all[k]) != n) {
            PyErr_Format(PyExc_ValueError, "%s has %zd entries but v has %zd", names[k],
                         (Py_ssize_t)PyArray_SIZE(all[k]), (Py_ssize_t)n);
            return -1;
        }
    if (n == 0) {
        PyErr_SetString(PyExc_ValueError, "no levels given");
        return -1;
    }
    data->n = (size_t)n;
    data->v = PyArray_DATA(a->v);
    data->rot = PyArray_DATA(a->rot);
    data->mu = PyArray_DATA(a->mu);
    data->energy = a->energy ? PyArray_DATA(a->energy) : NULL;
    data->sigma = a->sigma ? PyArray_DATA(a->sigma) : NULL;
    data->energy_zero = energy_zero;
    return 0;
}

/* The exact source's contexts for the evaluator's extra threads (clone_arg: the wkb_radial_settings, or
   NULL for the default) */
static void *radial_clone(void *settings) { return wkb_radial_alloc(settings); }
static void radial_release(void *ctx) { wkb_radial_free(ctx); }

/* The level source of a fit method: 0 first-order WKB (source NULL), 1 exact (a radial
   workspace, returned in *radial for the caller to free). Returns 0 or -1 with an exception. */
static int fit_source(int method, wkb_radial **radial, wkb_level_source *source, const wkb_level_source **out)
{
    *radial = NULL;
    *out = NULL;
    if (method == 0)
        return 0;
    if (method != 1) {
        PyErr_Format(PyExc_ValueError, "fit method code %d is invalid (0 wkb, 1 exact)", method);
        return -1;
    }
    if (!(*radial = wkb_radial_alloc(NULL))) {
        PyErr_NoMemory();
        return -1;
    }
    *source = (wkb_level_source){*radial, wkb_radial_source_set, wkb_radial_source_level, radial_clone, NULL,
                                 radial_release};
    *out = source;
    return 0;
}

static PyObject *py_set_fit_threads(PyObject *self, PyObject *args)
{
    int n;
    if (!PyArg_ParseTuple(args, "i", &n))
        return NULL;
    if (n < 0 || n > WKB_FIT_MAX_THREADS) {
        PyErr_Format(PyExc_ValueError, "fit threads %d is invalid: 0 (the default) or 1 to %d", n,
                     WKB_FIT_MAX_THREADS);
        return NULL;
    }
    return PyLong_FromLong(wkb_set_fit_threads(n));
}

static PyObject *py_set_fit_interpolation(PyObject *self, PyObject *args)
{
    int on;
    if (!PyArg_ParseTuple(args, "p", &on))
        return NULL;
    return PyLong_FromLong(wkb_set_fit_interpolation(on));
}

static PyObject *py_fit_evaluate(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "v", "rot", "mu", "energy_zero", "method", "energy_tol",
                             "jacobian", NULL};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *v_obj, *rot_obj, *mu_obj, *result = NULL;
    int energy_zero = WKB_ZERO_MINIMUM, method = 0, want_jac = 1, status;
    double energy_tol = 0; /* exact levels' target accuracy, cm-1 (0: the solver's default) */
    wkb_radial_settings rs;
    wkb_radial *radial = NULL;
    wkb_level_source source_store;
    const wkb_level_source *source = NULL;
    fit_arrays a = {0};
    wkb_fit_data data;
    wkb_potential pot;
    wkb_error err = {0};
    wkb_fit_evaluator *ev = NULL;
    PyArrayObject *calc = NULL, *jac = NULL;
    size_t bad_row = 0;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOOOO|iidp", kwlist, &model_name, &params_obj, &curve_obj, &v_obj,
                                     &rot_obj, &mu_obj, &energy_zero, &method, &energy_tol, &want_jac))
        return NULL;
    if (!(isfinite(energy_tol) && energy_tol >= 0)) {
        PyErr_SetString(PyExc_ValueError, "energy_tol must be a finite number > 0 (cm-1), or 0 for the default");
        return NULL;
    }
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (parse_fit_arrays(v_obj, rot_obj, mu_obj, NULL, NULL, energy_zero, &a, &data) < 0 ||
        fit_source(method, &radial, &source_store, &source) < 0)
        goto cleanup;
    if (radial && energy_tol > 0) {
        /* the same source with a looser (or tighter) accuracy target */
        rs = wkb_radial_default_settings();
        rs.energy_tol = energy_tol;
        wkb_radial_free(radial);
        if (!(radial = wkb_radial_alloc(&rs))) {
            PyErr_SetString(PyExc_ValueError, "invalid energy_tol for the exact solver (or out of memory)");
            goto cleanup;
        }
        source_store.ctx = radial;
        source_store.clone_arg = &rs; /* (clones are made at the evaluator's allocation, below) */
    }
    npy_intp dims[2] = {(npy_intp)data.n, (npy_intp)pot.model->n_params};
    if (!(calc = new_vector(dims[0])) || (want_jac && !(jac = (PyArrayObject *)PyArray_ZEROS(2, dims, NPY_DOUBLE, 0))))
        goto cleanup;
    {
        wkb_settings levels = wkb_fit_default_settings().levels;
        double *pc = PyArray_DATA(calc), *pj = jac ? PyArray_DATA(jac) : NULL;
        Py_BEGIN_ALLOW_THREADS
        ev = wkb_fit_evaluator_alloc(&data, &levels, source, &err);
        status = ev ? wkb_fit_evaluate(ev, &pot, pc, pj, &bad_row, &err) : (err.status ? err.status : WKB_ENOMEM);
        Py_END_ALLOW_THREADS
    }
    if (status) {
        if (ev && err.status != WKB_ENOMEM) {
            char msg[sizeof err.message];
            snprintf(msg, sizeof msg, "%s", err.message);
            wkb_fail(&err, err.status, "row %zu: %s", bad_row + 1, msg);
        }
        raise_status(&err);
        goto cleanup;
    }
    result = Py_BuildValue("(OO)", calc, jac ? (PyObject *)jac : Py_None);
cleanup:
    wkb_fit_evaluator_free(ev);
    wkb_radial_free(radial);
    fit_arrays_release(&a);
    Py_XDECREF(calc);
    Py_XDECREF(jac);
    return result;
}

/* tall_qr(A, b=None) -> (R, Q^T b [:p] or None, |rest of Q^T b|^2 or None): tall_qr.c (no threaded BLAS) */
static PyObject *py_tall_qr(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"A", "b", NULL};
    PyObject *A_obj, *b_obj = Py_None, *result = NULL;
    PyArrayObject *A = NULL, *b = NULL, *R = NULL, *qtb = NULL;
    double rest = 0;
    wkb_error err = {0};
    int status;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "O|O", kwlist, &A_obj, &b_obj))
        return NULL;
    if (!(A = as_double_array(A_obj, "A", 2)))
        return NULL;
    const npy_intp n = PyArray_DIM(A, 0), p = PyArray_DIM(A, 1);
    if (p < 1 || n < p) {
        PyErr_Format(PyExc_ValueError, "A is %zd x %zd: QR needs at least one column and as many rows as columns",
                     (Py_ssize_t)n, (Py_ssize_t)p);
        goto cleanup;
    }
    if (b_obj != Py_None) {
        if (!(b = as_double_array(b_obj, "b", 1)))
            goto cleanup;
        if (PyArray_DIM(b, 0) != n) {
            PyErr_Format(PyExc_ValueError, "b has %zd entries but A has %zd rows", (Py_ssize_t)PyArray_DIM(b, 0),
                         (Py_ssize_t)n);
            goto cleanup;
        }
    }
    npy_intp dims[2] = {p, p};
    if (!(R = (PyArrayObject *)PyArray_ZEROS(2, dims, NPY_DOUBLE, 0)) || !(qtb = new_vector(p)))
        goto cleanup;
    {
        const double *pa = PyArray_DATA(A), *pb = b ? PyArray_DATA(b) : NULL;
        double *pr = PyArray_DATA(R), *pq = PyArray_DATA(qtb);
        Py_BEGIN_ALLOW_THREADS
        status = wkb_tall_qr((size_t)n, (size_t)p, pa, pb, pr, pq, &rest, &err);
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (b)
        result = Py_BuildValue("(OOd)", R, qtb, rest);
    else
        result = Py_BuildValue("(OOO)", R, Py_None, Py_None);
cleanup:
    Py_XDECREF(A);
    Py_XDECREF(b);
    Py_XDECREF(R);
    Py_XDECREF(qtb);
    return result;
}

/* [flag, ...] as a list of bools, one per parameter */
static PyObject *insensitive_list(const int *flags, size_t np)
{
    PyObject *list = PyList_New((Py_ssize_t)np);
    if (!list)
        return NULL;
    for (size_t k = 0; k < np; k++)
        PyList_SET_ITEM(list, (Py_ssize_t)k, PyBool_FromLong(flags[k]));
    return list;
}

static PyObject *py_fit_run(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "v", "rot", "mu", "energy", "sigma", "energy_zero",
                             "vary", "lower", "upper", "max_iterations", "xtol", "gtol", "decrease_tol", "method",
                             "offset", NULL};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *v_obj, *rot_obj, *mu_obj, *energy_obj, *sigma_obj, *vary_obj, *lower_obj,
        *upper_obj, *offset_obj = Py_None, *result = NULL;
    int energy_zero, status, method = 0;
    PyArrayObject *offset = NULL; /* per-row correction added to calc (None: none) */
    Py_ssize_t max_iterations = -1;
    wkb_radial *radial = NULL;
    wkb_level_source source_store;
    const wkb_level_source *source = NULL;
    wkb_fit_settings settings = wkb_fit_default_settings();
    fit_arrays a = {0};
    wkb_fit_data data;
    wkb_fit_spec spec;
    wkb_fit_outcome out;
    wkb_potential pot;
    wkb_error err = {0};
    PyArrayObject *calc = NULL, *jac = NULL, *best = NULL;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOOOOOOiOOO|ndddiO", kwlist, &model_name, &params_obj,
                                     &curve_obj, &v_obj, &rot_obj, &mu_obj, &energy_obj, &sigma_obj, &energy_zero,
                                     &vary_obj, &lower_obj, &upper_obj, &max_iterations, &settings.xtol,
                                     &settings.gtol, &settings.decrease_tol, &method, &offset_obj))
        return NULL;
    if (max_iterations >= 0)
        settings.max_iterations = (size_t)max_iterations;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (parse_fit_arrays(v_obj, rot_obj, mu_obj, energy_obj, sigma_obj, energy_zero, &a, &data) < 0 ||
        fit_source(method, &radial, &source_store, &source) < 0)
        goto cleanup;
    if (offset_obj != Py_None) {
        if (!(offset = as_double_array(offset_obj, "offset", 1)))
            goto cleanup;
        if ((size_t)PyArray_SIZE(offset) != data.n) {
            PyErr_Format(PyExc_ValueError, "offset has %zd entries but v has %zu", (Py_ssize_t)PyArray_SIZE(offset),
                         data.n);
            goto cleanup;
        }
        data.offset = PyArray_DATA(offset);
    }
    const size_t np = pot.model->n_params;
    if (parse_fit_spec(vary_obj, lower_obj, upper_obj, np, &spec) < 0)
        goto cleanup;
    npy_intp dims[2] = {(npy_intp)data.n, (npy_intp)np};
    if (!(calc = new_vector(dims[0])) || !(jac = (PyArrayObject *)PyArray_ZEROS(2, dims, NPY_DOUBLE, 0)) ||
        !(best = new_vector((npy_intp)np)))
        goto cleanup;
    {
        double *pc = PyArray_DATA(calc), *pj = PyArray_DATA(jac);
        Py_BEGIN_ALLOW_THREADS
        status = wkb_fit_run(&pot, &data, &spec, &settings, source, &out, pc, pj, &err);
        Py_END_ALLOW_THREADS
    }
    if (status) {
        /* a failure at the start names its row: the caller maps it to the user's data */
        if (out.bad_row != (size_t)-1 && status != WKB_ENOMEM) {
            PyObject *exc = Py_BuildValue("(sn)", err.message, (Py_ssize_t)out.bad_row);
            if (exc) {
                PyErr_SetObject(PyExc_ValueError, exc);
                Py_DECREF(exc);
            }
        } else {
            raise_status(&err);
        }
        goto cleanup;
    }
    memcpy(PyArray_DATA(best), out.params, np * sizeof(double));
    if (!(result = PyDict_New()))
        goto cleanup;
    if (PyDict_SetItemString(result, "params", (PyObject *)best) < 0 ||
        PyDict_SetItemString(result, "calc", (PyObject *)calc) < 0 ||
        PyDict_SetItemString(result, "jacobian", (PyObject *)jac) < 0 ||
        dict_steal(result, "chi_square", PyFloat_FromDouble(out.chi_square)) < 0 ||
        dict_steal(result, "predicted_decrease", PyFloat_FromDouble(out.predicted_decrease)) < 0 ||
        dict_steal(result, "iterations", PyLong_FromSize_t(out.iterations)) < 0 ||
        dict_steal(result, "n_eval", PyLong_FromSize_t(out.n_eval)) < 0 ||
        dict_steal(result, "n_infeasible", PyLong_FromSize_t(out.n_infeasible)) < 0 ||
        dict_steal(result, "n_orbits", PyLong_FromSize_t(out.n_orbits)) < 0 ||
        dict_steal(result, "n_threads", PyLong_FromSize_t(out.n_threads)) < 0 ||
        dict_steal(result, "stop", PyUnicode_FromString(wkb_fit_stop_name(out.stop))) < 0 ||
        dict_steal(result, "test", PyLong_FromLong(out.test)) < 0 ||
        dict_steal(result, "insensitive", insensitive_list(out.insensitive, np)) < 0 ||
        dict_steal(result, "last_infeasible", PyUnicode_FromString(out.n_infeasible ? out.last_infeasible.message
                                                                                      : "")) < 0)
        Py_CLEAR(result);
cleanup:
    fit_arrays_release(&a);
    wkb_radial_free(radial);
    Py_XDECREF(offset);
    Py_XDECREF(calc);
    Py_XDECREF(jac);
    Py_XDECREF(best);
    return result;
}

/* ---------------------------------------------------------------- replica fits (replica_fit.c) */

/* A 2-dimensional C double array of shape (rows, cols); NULL with a ValueError. */
static PyArrayObject *as_matrix(PyObject *obj, const char *what, npy_intp rows, npy_intp cols)
{
    PyArrayObject *a = as_double_array(obj, what, 2);
    if (a && ((rows >= 0 && PyArray_DIM(a, 0) != rows) || PyArray_DIM(a, 1) != cols)) {
        PyErr_Format(PyExc_ValueError, "%s must have shape (%zd, %zd), got (%zd, %zd)", what, (Py_ssize_t)rows,
                     (Py_ssize_t)cols, (Py_ssize_t)PyArray_DIM(a, 0), (Py_ssize_t)PyArray_DIM(a, 1));
        Py_CLEAR(a);
    }
    return a;
}

static PyObject *py_fit_replicas(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "v", "rot", "mu", "sigma", "energy_zero", "vary", "lower",
                             "upper", "energies", "counts", "shift_mu", "shift_rot", "shift_v", "shift", "slope",
                             "pred_mu", "pred_v", "max_iterations", NULL};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *v_obj, *rot_obj, *mu_obj, *sigma_obj, *vary_obj, *lower_obj, *upper_obj,
        *energies_obj, *counts_obj = Py_None, *smu_obj = Py_None, *srot_obj = Py_None, *sv_obj = Py_None,
        *shift_obj = Py_None, *slope_obj = Py_None, *pred_v_obj = Py_None, *result = NULL;
    int energy_zero, status;
    double pred_mu = 0;
    Py_ssize_t max_iterations = -1;
    wkb_fit_settings settings = wkb_fit_default_settings();
    fit_arrays a = {0};
    wkb_fit_data data;
    wkb_fit_spec spec;
    wkb_potential pot;
    wkb_error err = {0};
    wkb_replica_outcome *outcomes = NULL;
    PyArrayObject *energies = NULL, *counts = NULL, *smu = NULL,
                  *srot = NULL, *sv = NULL, *shift = NULL, *slope = NULL, *params = NULL, *pred = NULL,
                  *pred_v = NULL;
    enum { NCOLS = 9 };
    PyArrayObject *cols[NCOLS] = {NULL};
    static const char *col_names[NCOLS] = {"status", "stop", "chi_square", "iterations", "pred_count", "vD",
                                           "asymptote", "extrapolated", "insensitive"};

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOOOOOiOOOO|OOOOOOdOn", kwlist, &model_name, &params_obj,
                                     &curve_obj, &v_obj, &rot_obj, &mu_obj, &sigma_obj, &energy_zero, &vary_obj,
                                     &lower_obj, &upper_obj, &energies_obj, &counts_obj, &smu_obj, &srot_obj,
                                     &sv_obj, &shift_obj, &slope_obj, &pred_mu, &pred_v_obj, &max_iterations))
        return NULL;
    if (max_iterations >= 0)
        settings.max_iterations = (size_t)max_iterations;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (pred_v_obj != Py_None) {
        if (!(pred_v = as_checked_int_array(pred_v_obj, "pred_v", 0)))
            return NULL;
        if (PyArray_SIZE(pred_v) && !(isfinite(pred_mu) && pred_mu > 0)) {
            PyErr_Format(PyExc_ValueError, "pred_mu=%g must be a positive reduced mass (u)", pred_mu);
            goto cleanup;
        }
    }
    const npy_intp n_pred_v = pred_v ? PyArray_SIZE(pred_v) : 0;
    if (parse_fit_arrays(v_obj, rot_obj, mu_obj, NULL, sigma_obj, energy_zero, &a, &data) < 0)
        goto cleanup;
    const size_t np = pot.model->n_params, n = data.n;
    if (parse_fit_spec(vary_obj, lower_obj, upper_obj, np, &spec) < 0)
        goto cleanup;
    if (!(energies = as_matrix(energies_obj, "energies", -1, (npy_intp)n)))
        goto cleanup;
    const npy_intp n_rep = PyArray_DIM(energies, 0);
    if (counts_obj != Py_None && !(counts = as_matrix(counts_obj, "counts", n_rep, (npy_intp)n)))
        goto cleanup;
    wkb_level_shifts shifts = {0};
    const int have_shifts = shift_obj != Py_None;
    if (have_shifts) {
        if (!(smu = as_double_array(smu_obj, "shift_mu", 1)) || !(srot = as_double_array(srot_obj, "shift_rot", 1)) ||
            !(sv = as_checked_int_array(sv_obj, "shift_v", 0)) || !(shift = as_double_array(shift_obj, "shift", 1)))
            goto cleanup;
        const npy_intp ns = PyArray_SIZE(shift);
        if (PyArray_SIZE(smu) != ns || PyArray_SIZE(srot) != ns || PyArray_SIZE(sv) != ns) {
            PyErr_SetString(PyExc_ValueError, "shift_mu, shift_rot, shift_v and shift need one entry per level");
            goto cleanup;
        }
        if (slope_obj != Py_None && !(slope = as_matrix(slope_obj, "slope", ns, (npy_intp)np)))
            goto cleanup;
        shifts.n = (size_t)ns;
        shifts.mu = PyArray_DATA(smu), shifts.rot = PyArray_DATA(srot), shifts.v = PyArray_DATA(sv);
        shifts.shift = PyArray_DATA(shift);
        shifts.slope = slope ? PyArray_DATA(slope) : NULL;
        shifts.p0 = pot.p; /* the corrections were made at the start (the central fit) */
    }
    npy_intp pdims[2] = {n_rep, (npy_intp)np}, edims[2] = {n_rep, n_pred_v};
    if (!(params = (PyArrayObject *)PyArray_ZEROS(2, pdims, NPY_DOUBLE, 0)) ||
        !(pred = (PyArrayObject *)PyArray_ZEROS(2, edims, NPY_DOUBLE, 0)))
        goto cleanup;
    if (!(outcomes = calloc(n_rep ? (size_t)n_rep : 1, sizeof *outcomes))) {
        PyErr_NoMemory();
        goto cleanup;
    }
    {
        const double *pe = PyArray_DATA(energies), *pc = counts ? PyArray_DATA(counts) : NULL;
        double *pp = PyArray_DATA(params), *pr = PyArray_DATA(pred);
        Py_BEGIN_ALLOW_THREADS
        const int *pv = pred_v ? PyArray_DATA(pred_v) : NULL;
        status = wkb_fit_replicas(&pot, &data, &spec, &settings, have_shifts ? &shifts : NULL, (size_t)n_rep, pe, pc,
                                  pred_mu, pv, (size_t)n_pred_v, outcomes, pp, pr, &err);
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    for (int c = 0; c < NCOLS; c++)
        if (!(cols[c] = new_vector(n_rep)))
            goto cleanup;
    PyObject *messages = PyList_New(n_rep);
    if (!messages)
        goto cleanup;
    for (npy_intp r = 0; r < n_rep; r++) {
        const wkb_replica_outcome *o = outcomes + r;
        const double vals[NCOLS] = {o->status ? o->status : (o->pred_status ? -o->pred_status : 0), o->stop,
                                    o->chi_square, (double)o->iterations, (double)o->pred_count, o->vD, o->asymptote,
                                    (double)(o->extrapolated_fit + o->extrapolated_pred), o->insensitive};
        for (int c = 0; c < NCOLS; c++)
            ((double *)PyArray_DATA(cols[c]))[r] = vals[c];
        PyObject *msg = PyUnicode_FromString(o->status || o->pred_status ? o->error.message : "");
        if (!msg) {
            Py_DECREF(messages);
            goto cleanup;
        }
        PyList_SET_ITEM(messages, r, msg);
    }
    if (!(result = PyDict_New())) {
        Py_DECREF(messages);
        goto cleanup;
    }
    if (dict_steal(result, "message", messages) < 0 ||
        PyDict_SetItemString(result, "params", (PyObject *)params) < 0 ||
        PyDict_SetItemString(result, "pred_energy", (PyObject *)pred) < 0)
        goto fail;
    for (int c = 0; c < NCOLS; c++)
        if (PyDict_SetItemString(result, col_names[c], (PyObject *)cols[c]) < 0)
            goto fail;
    goto cleanup;
fail:
    Py_CLEAR(result);
cleanup:
    free(outcomes);
    fit_arrays_release(&a);
    Py_XDECREF(energies);
    Py_XDECREF(counts);
    Py_XDECREF(smu);
    Py_XDECREF(srot);
    Py_XDECREF(sv);
    Py_XDECREF(shift);
    Py_XDECREF(slope);
    Py_XDECREF(params);
    Py_XDECREF(pred);
    Py_XDECREF(pred_v);
    for (int c = 0; c < NCOLS; c++)
        Py_XDECREF(cols[c]);
    return result;
}

/* A Born-Oppenheimer corrected potential for fit_run_rows: the template model (reference
   isotopologue) in *pot, one variant per (isotopologue, J) and the model of every level.
   Returns 0 or -1 with an exception; the caller frees *tmpl, *variants, *models and arrs. */
static int parse_bob(const char *model_name, PyObject *params_obj, PyObject *counts_obj, double power,
                     PyObject *variant_obj, PyObject *ad_obj, PyObject *na_obj, PyObject *rot_obj, PyObject *lv_obj,
                     wkb_potential *pot, wkb_bob_model **tmpl, wkb_bob_model **variants, const wkb_model ***models,
                     PyArrayObject **arrs)
{
    const wkb_model *base = wkb_model_by_name(model_name);
    wkb_error err = {0};
    if (!base) {
        PyErr_Format(PyExc_ValueError, "unknown potential model '%s'", model_name);
        return -1;
    }
    if (!(arrs[0] = (PyArrayObject *)PyArray_FROM_OTF(counts_obj, NPY_INT, NPY_ARRAY_IN_ARRAY | NPY_ARRAY_FORCECAST)) ||
        !(arrs[1] = (PyArrayObject *)PyArray_FROM_OTF(variant_obj, NPY_INT, NPY_ARRAY_IN_ARRAY | NPY_ARRAY_FORCECAST)) ||
        !(arrs[2] = as_double_array(ad_obj, "variant_adiabatic", 2)) ||
        !(arrs[3] = as_double_array(na_obj, "variant_centrifugal", 2)) ||
        !(arrs[4] = as_double_array(rot_obj, "variant_rot_eps", 1)))
        return -1;
    if (PyArray_SIZE(arrs[0]) != 4) {
        PyErr_SetString(PyExc_ValueError, "bob_counts needs 4 entries (S_A, S_B, R_A, R_B)");
        return -1;
    }
    const npy_intp nvar = PyArray_SIZE(arrs[4]);
    if (PyArray_DIM(arrs[2], 0) != nvar || PyArray_DIM(arrs[2], 1) != 2 || PyArray_DIM(arrs[3], 0) != nvar ||
        PyArray_DIM(arrs[3], 1) != 2) {
        PyErr_SetString(PyExc_ValueError, "variant_adiabatic and variant_centrifugal need shape (n_variants, 2)");
        return -1;
    }
    const npy_intp nl = PyArray_SIZE(arrs[1]);
    PyObject *lv = PyArray_FROM_OTF(lv_obj, NPY_INT, NPY_ARRAY_IN_ARRAY | NPY_ARRAY_FORCECAST);
    if (!lv)
        return -1;
    const npy_intp n_levels = PyArray_SIZE((PyArrayObject *)lv);
    Py_DECREF(lv);
    if (nl != n_levels) {
        PyErr_Format(PyExc_ValueError, "level_variant has %zd entries for %zd levels", (Py_ssize_t)nl,
                     (Py_ssize_t)n_levels);
        return -1;
    }
    if (!(*tmpl = calloc(1, sizeof **tmpl)) || !(*variants = calloc((size_t)nvar + 1, sizeof **variants)) ||
        !(*models = calloc((size_t)nl + 1, sizeof **models))) {
        PyErr_NoMemory();
        return -1;
    }
    if (wkb_bob_model_init(*tmpl, base, PyArray_DATA(arrs[0]), power, &err)) {
        raise_status(&err);
        return -1;
    }
    PyArrayObject *params = as_double_array(params_obj, "params", 1);
    if (!params)
        return -1;
    const size_t np = (*tmpl)->model.n_params;
    if ((size_t)PyArray_SIZE(params) != np) {
        PyErr_Format(PyExc_ValueError, "model %s with its corrections takes %zu parameters, got %zd", base->name, np,
                     (Py_ssize_t)PyArray_SIZE(params));
        Py_DECREF(params);
        return -1;
    }
    int status = wkb_potential_init(pot, &(*tmpl)->model, PyArray_DATA(params), NULL, &err);
    if (!status)
        status = wkb_bob_potential_check(*tmpl, PyArray_DATA(params), &err);
    Py_DECREF(params);
    if (status) {
        raise_status(&err);
        return -1;
    }
    const double *ad = PyArray_DATA(arrs[2]), *na = PyArray_DATA(arrs[3]), *re = PyArray_DATA(arrs[4]);
    for (npy_intp k = 0; k < nvar; k++)
        wkb_bob_model_variant(*tmpl, &(*variants)[k], ad + 2 * k, na + 2 * k, re[k]);
    const int *var = PyArray_DATA(arrs[1]);
    for (npy_intp i = 0; i < nl; i++) {
        if (var[i] < 0 || var[i] >= nvar) {
            PyErr_Format(PyExc_ValueError, "level %zd: variant %d is invalid", (Py_ssize_t)i, var[i]);
            return -1;
        }
        (*models)[i] = &(*variants)[var[i]].model;
    }
    return 0;
}

/* fit_run_rows: a fit to rows that are linear combinations of distinct levels (mixed data). */
static PyObject *py_fit_run_rows(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "level_v", "level_rot", "level_mu", "level_a", "coef_a",
                             "level_b", "coef_b", "coef_asymptote", "extra_index", "coef_extra", "offset",
                             "observed", "sigma", "extra_start", "vary", "lower", "upper", "max_iterations",
                             "method", "bob_counts", "bob_power", "level_variant", "variant_adiabatic",
                             "variant_centrifugal", "variant_rot_eps", NULL};
    enum { NI = 3, ND = 7 };
    const char *model_name;
    PyObject *params_obj, *curve_obj, *lv_obj, *lrot_obj, *lmu_obj, *iobj[NI], *dobj[ND], *extra_obj, *vary_obj,
        *lower_obj, *upper_obj, *result = NULL;
    int status, method = 0;
    Py_ssize_t max_iterations = -1;
    wkb_radial *radial = NULL;
    wkb_level_source source_store;
    const wkb_level_source *source = NULL;
    wkb_fit_settings settings = wkb_fit_default_settings();
    fit_arrays a = {0};
    wkb_fit_data levels;
    wkb_fit_rows rows;
    wkb_fit_spec spec;
    wkb_fit_outcome out;
    wkb_potential pot;
    wkb_error err = {0};
    PyArrayObject *iarr[NI] = {NULL}, *darr[ND] = {NULL};
    PyArrayObject *calc = NULL, *jac = NULL, *best = NULL, *extra = NULL;
    static const char *inames[NI] = {"level_a", "level_b", "extra_index"};
    static const char *dnames[ND] = {"coef_a", "coef_b", "coef_asymptote", "coef_extra", "offset", "observed",
                                     "sigma"};
    PyObject *bob_counts_obj = Py_None, *variant_obj = Py_None, *vad_obj = Py_None, *vna_obj = Py_None,
             *vrot_obj = Py_None;
    double bob_power = 3;
    wkb_bob_model *bob_template = NULL, *bob_variants = NULL;
    const wkb_model **level_models = NULL;
    PyArrayObject *bob_arr[5] = {NULL};

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOOOOOOOOOOOOOOOOOO|niOdOOOO", kwlist, &model_name, &params_obj,
                                     &curve_obj, &lv_obj, &lrot_obj, &lmu_obj, &iobj[0], &dobj[0], &iobj[1],
                                     &dobj[1], &dobj[2], &iobj[2], &dobj[3], &dobj[4], &dobj[5], &dobj[6],
                                     &extra_obj, &vary_obj, &lower_obj, &upper_obj, &max_iterations, &method,
                                     &bob_counts_obj, &bob_power, &variant_obj, &vad_obj, &vna_obj, &vrot_obj))
        return NULL;
    if (max_iterations >= 0)
        settings.max_iterations = (size_t)max_iterations;
    if (bob_counts_obj == Py_None) {
        if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
            return NULL;
    } else if (parse_bob(model_name, params_obj, bob_counts_obj, bob_power, variant_obj, vad_obj, vna_obj, vrot_obj,
                         lv_obj, &pot, &bob_template, &bob_variants, &level_models, bob_arr) < 0) {
        goto cleanup;
    }
    if (parse_fit_arrays(lv_obj, lrot_obj, lmu_obj, NULL, NULL, WKB_ZERO_MINIMUM, &a, &levels) < 0 ||
        fit_source(method, &radial, &source_store, &source) < 0)
        goto cleanup;
    levels.level_model = level_models;
    for (int k = 0; k < NI; k++) {
        iarr[k] = (PyArrayObject *)PyArray_FROM_OTF(iobj[k], NPY_INT, NPY_ARRAY_IN_ARRAY | NPY_ARRAY_FORCECAST);
        if (!iarr[k])
            goto cleanup;
    }
    for (int k = 0; k < ND; k++)
        if (!(darr[k] = as_double_array(dobj[k], dnames[k], 1)))
            goto cleanup;
    const npy_intp n = PyArray_SIZE(darr[5]);
    for (int k = 0; k < NI; k++)
        if (PyArray_SIZE(iarr[k]) != n) {
            PyErr_Format(PyExc_ValueError, "%s has %zd entries but observed has %zd", inames[k],
                         (Py_ssize_t)PyArray_SIZE(iarr[k]), (Py_ssize_t)n);
            goto cleanup;
        }
    for (int k = 0; k < ND; k++)
        if (PyArray_SIZE(darr[k]) != n) {
            PyErr_Format(PyExc_ValueError, "%s has %zd entries but observed has %zd", dnames[k],
                         (Py_ssize_t)PyArray_SIZE(darr[k]), (Py_ssize_t)n);
            goto cleanup;
        }
    /* the extras are written back: work on a private copy */
    if (!(extra = (PyArrayObject *)PyArray_FROM_OTF(extra_obj, NPY_DOUBLE, NPY_ARRAY_IN_ARRAY | NPY_ARRAY_ENSURECOPY)))
        goto cleanup;
    const size_t np = pot.model->n_params, ne = (size_t)PyArray_SIZE(extra);
    if (parse_fit_spec(vary_obj, lower_obj, upper_obj, np, &spec) < 0)
        goto cleanup;
    memset(&rows, 0, sizeof rows);
    rows.n = (size_t)n;
    rows.n_extra = ne;
    rows.level_a = PyArray_DATA(iarr[0]);
    rows.level_b = PyArray_DATA(iarr[1]);
    rows.extra = PyArray_DATA(iarr[2]);
    rows.coef_a = PyArray_DATA(darr[0]);
    rows.coef_b = PyArray_DATA(darr[1]);
    rows.coef_asymptote = PyArray_DATA(darr[2]);
    rows.coef_extra = PyArray_DATA(darr[3]);
    rows.offset = PyArray_DATA(darr[4]);
    rows.observed = PyArray_DATA(darr[5]);
    rows.sigma = PyArray_DATA(darr[6]);
    npy_intp dims[2] = {n, (npy_intp)(np + ne)};
    if (!(calc = new_vector(n)) || !(jac = (PyArrayObject *)PyArray_ZEROS(2, dims, NPY_DOUBLE, 0)) ||
        !(best = new_vector((npy_intp)np)))
        goto cleanup;
    {
        double *pc = PyArray_DATA(calc), *pj = PyArray_DATA(jac), *pe = PyArray_DATA(extra);
        Py_BEGIN_ALLOW_THREADS
        status = wkb_fit_run_rows(&pot, &levels, &rows, &spec, pe, &settings, source, &out, pc, pj, &err);
        Py_END_ALLOW_THREADS
    }
    if (status) {
        /* a failure at the start names its level: the caller maps it to the user's data */
        if (out.bad_row != (size_t)-1 && status != WKB_ENOMEM) {
            PyObject *exc = Py_BuildValue("(sn)", err.message, (Py_ssize_t)out.bad_row);
            if (exc) {
                PyErr_SetObject(PyExc_ValueError, exc);
                Py_DECREF(exc);
            }
        } else {
            raise_status(&err);
        }
        goto cleanup;
    }
    memcpy(PyArray_DATA(best), out.params, np * sizeof(double));
    if (!(result = PyDict_New()))
        goto cleanup;
    if (PyDict_SetItemString(result, "params", (PyObject *)best) < 0 ||
        PyDict_SetItemString(result, "extra", (PyObject *)extra) < 0 ||
        PyDict_SetItemString(result, "calc", (PyObject *)calc) < 0 ||
        PyDict_SetItemString(result, "jacobian", (PyObject *)jac) < 0 ||
        dict_steal(result, "chi_square", PyFloat_FromDouble(out.chi_square)) < 0 ||
        dict_steal(result, "predicted_decrease", PyFloat_FromDouble(out.predicted_decrease)) < 0 ||
        dict_steal(result, "iterations", PyLong_FromSize_t(out.iterations)) < 0 ||
        dict_steal(result, "n_eval", PyLong_FromSize_t(out.n_eval)) < 0 ||
        dict_steal(result, "n_infeasible", PyLong_FromSize_t(out.n_infeasible)) < 0 ||
        dict_steal(result, "n_level_calculations", PyLong_FromSize_t(out.n_level_calculations)) < 0 ||
        dict_steal(result, "n_orbits", PyLong_FromSize_t(out.n_orbits)) < 0 ||
        dict_steal(result, "n_threads", PyLong_FromSize_t(out.n_threads)) < 0 ||
        dict_steal(result, "stop", PyUnicode_FromString(wkb_fit_stop_name(out.stop))) < 0 ||
        dict_steal(result, "test", PyLong_FromLong(out.test)) < 0 ||
        dict_steal(result, "insensitive", insensitive_list(out.insensitive, np)) < 0 ||
        dict_steal(result, "last_infeasible", PyUnicode_FromString(out.n_infeasible ? out.last_infeasible.message
                                                                                      : "")) < 0)
        Py_CLEAR(result);
cleanup:
    fit_arrays_release(&a);
    wkb_radial_free(radial);
    for (int k = 0; k < NI; k++)
        Py_XDECREF(iarr[k]);
    for (int k = 0; k < ND; k++)
        Py_XDECREF(darr[k]);
    Py_XDECREF(calc);
    Py_XDECREF(jac);
    Py_XDECREF(best);
    Py_XDECREF(extra);
    for (int k = 0; k < 5; k++)
        Py_XDECREF(bob_arr[k]);
    free(level_models);
    free(bob_variants);
    free(bob_template);
    return result;
}

/* Work limit of the exact solver, in level-points: levels to solve times the points of their radial
   grid (the work of one level is about proportional to its grid). About 1.5e7 level-points per second
   were measured on one core (a Morse well, 50 to 2000 levels), so the default stops a call before
   it would run for about a minute; exact_levels(max_grid_work=...) raises it. */
#define WKB_MAX_EXACT_WORK 1e9

static int exact_work_refused(double work, double limit, const char *how)
{
    if (!(limit >= 0) || work <= limit)
        return 0;
    value_error("the exact levels asked for need about %.3g level-points (levels times the points of their radial "
                "grid), more than the work limit max_grid_work=%.3g: %s", work, limit, how);
    return 1;
}

static PyObject *py_fit_levels(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "mu", "rot", "method", "max_work", NULL};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *result = NULL;
    double mu, rot, max_work = WKB_MAX_EXACT_WORK;
    int status, method = 0;
    wkb_radial *radial = NULL;
    wkb_level_source source_store;
    const wkb_level_source *source = NULL;
    wkb_potential pot;
    wkb_error err = {0};
    size_t count = 0;
    double vD = NAN;
    PyArrayObject *energy = NULL, *jac = NULL, *dvD = NULL;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOdd|id", kwlist, &model_name, &params_obj, &curve_obj, &mu, &rot,
                                     &method, &max_work))
        return NULL;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (fit_source(method, &radial, &source_store, &source) < 0)
        return NULL;
    const size_t np = pot.model->n_params;
    wkb_settings levels = wkb_fit_default_settings().levels;
    /* first the number of bound (WKB) levels, then the levels; the exact count may differ */
    Py_BEGIN_ALLOW_THREADS
    status = wkb_fit_levels(&pot, mu, rot, &levels, NULL, 0, NULL, NULL, &count, &vD, NULL, &err);
    Py_END_ALLOW_THREADS
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (radial) {
        /* the exact count may exceed the WKB one (a wall lower than the asymptote binds levels only
           through the boundary at r = 0): size the arrays by the larger of the two */
        Py_BEGIN_ALLOW_THREADS
        status = wkb_radial_set(radial, &pot, mu, rot, &err);
        Py_END_ALLOW_THREADS
        if (status) {
            raise_status(&err);
            goto cleanup;
        }
        if (wkb_radial_count(radial) > count)
            count = wkb_radial_count(radial);
        if (exact_work_refused((double)count * (double)wkb_radial_grid_size(radial), max_work,
                               "the potential binds very many exact levels for this reduced mass (its parameters "
                               "may be far from a physical curve, or its inner wall lower than the asymptote, "
                               "which binds levels only through the boundary at r = 0)"))
            goto cleanup;
    }
    count += 2;
    npy_intp dims[2] = {(npy_intp)count, (npy_intp)np};
    if (!(energy = new_vector(dims[0])) || !(jac = (PyArrayObject *)PyArray_ZEROS(2, dims, NPY_DOUBLE, 0)) ||
        !(dvD = new_vector((npy_intp)np)))
        goto cleanup;
    {
        double *pe = PyArray_DATA(energy), *pj = PyArray_DATA(jac), *pd = PyArray_DATA(dvD);
        size_t count2 = 0;
        Py_BEGIN_ALLOW_THREADS
        status = wkb_fit_levels(&pot, mu, rot, &levels, source, count, pe, pj, &count2, &vD, pd, &err);
        Py_END_ALLOW_THREADS
        if (!status && count2 > count)
            status = wkb_fail(&err, WKB_ENUMERIC, "%zu bound levels found, more than the %zu expected", count2, count);
        count = count2;
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    {
        /* keep the rows of the bound levels only */
        npy_intp newdims[2] = {(npy_intp)count, (npy_intp)np};
        PyArray_Dims shape1 = {newdims, 1}, shape2 = {newdims, 2};
        PyObject *none = PyArray_Resize(energy, &shape1, 0, NPY_CORDER);
        if (!none)
            goto cleanup;
        Py_DECREF(none);
        if (!(none = PyArray_Resize(jac, &shape2, 0, NPY_CORDER)))
            goto cleanup;
        Py_DECREF(none);
    }
    if (!(result = PyDict_New()))
        goto cleanup;
    if (PyDict_SetItemString(result, "energy", (PyObject *)energy) < 0 ||
        PyDict_SetItemString(result, "jacobian", (PyObject *)jac) < 0 ||
        PyDict_SetItemString(result, "dvD_dp", (PyObject *)dvD) < 0 ||
        dict_steal(result, "vD", PyFloat_FromDouble(vD)) < 0 ||
        dict_steal(result, "asymptote", PyFloat_FromDouble(wkb_potential_asymptote(&pot))) < 0)
        Py_CLEAR(result);
cleanup:
    wkb_radial_free(radial);
    Py_XDECREF(energy);
    Py_XDECREF(jac);
    Py_XDECREF(dvD);
    return result;
}

/* ---------------------------------------------------------------- exact levels (radial.c) */


static PyObject *py_exact_levels(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"model", "params", "curve", "mu", "J", "v", "want_dVdp", "want_wavefunctions",
                             "energy_tol", "min_binding", "phase_step", "max_points", "max_levels", "max_work", NULL};
    enum { NCOL = 10 };
    static const char *names[NCOL] = {"v", "J", "energy", "binding_energy", "inner_turning_point",
                                      "outer_turning_point", "Bv", "dEdv", "error", "grid_points"};
    const char *model_name;
    PyObject *params_obj, *curve_obj, *J_obj, *v_obj = Py_None;
    double mu;
    int want_dVdp = 0, want_wf = 0;
    Py_ssize_t max_points = -1, max_levels = -1; /* work limits; -1 keeps the defaults / no limit */
    double max_work = WKB_MAX_EXACT_WORK, work = 0;  /* level-points so far (a negative limit: none) */
    wkb_radial_settings settings = wkb_radial_default_settings();
    PyArrayObject *J_arr = NULL, *v_arr = NULL, *dVdp = NULL, *counts = NULL;
    PyArrayObject *cols[NCOL] = {NULL};
    PyObject *result = NULL, *wavefunctions = NULL;
    wkb_potential pot;
    wkb_radial *ws = NULL;
    wkb_radial_level *lv = NULL;
    int *lv_J = NULL;
    wkb_error err = {0};
    int status = WKB_SUCCESS;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "sOOdO|Oppdddnnd", kwlist, &model_name, &params_obj, &curve_obj,
                                     &mu, &J_obj, &v_obj, &want_dVdp, &want_wf, &settings.energy_tol,
                                     &settings.min_binding, &settings.phase_step, &max_points, &max_levels,
                                     &max_work))
        return NULL;
    if (max_points >= 0)
        settings.max_points = (size_t)max_points;
    if (parse_potential(model_name, params_obj, curve_obj, &pot) < 0)
        return NULL;
    if (!(J_arr = as_checked_int_array(J_obj, "J", 0)))
        goto cleanup;
    if (PyArray_NDIM(J_arr) != 1 || PyArray_SIZE(J_arr) < 1) {
        PyErr_SetString(PyExc_ValueError, "J must be a non-empty 1-dimensional array of integers");
        goto cleanup;
    }
    if (v_obj != Py_None) {
        if (!(v_arr = as_checked_int_array(v_obj, "v", 0)))
            goto cleanup;
        if (PyArray_NDIM(v_arr) != 1) {
            PyErr_SetString(PyExc_ValueError, "v must be a 1-dimensional array of integers");
            goto cleanup;
        }
    }
    if (!(mu > 0) || !isfinite(mu)) {
        value_error("reduced mass mu=%g u is invalid: it must be a finite number > 0", mu);
        goto cleanup;
    }
    if (!(ws = wkb_radial_alloc(&settings))) {
        value_error("invalid exact-solver settings (energy_tol=%g and min_binding=%g must be > 0, "
                     "0 <= phase_step=%g <= 0.5)", settings.energy_tol, settings.min_binding, settings.phase_step);
        goto cleanup;
    }
    const size_t nJ = (size_t)PyArray_SIZE(J_arr), np = pot.model->n_params;
    const int *Js = PyArray_DATA(J_arr);
    const int *vv = v_arr ? (const int *)PyArray_DATA(v_arr) : NULL;
    const size_t nv = v_arr ? (size_t)PyArray_SIZE(v_arr) : 0;
    if (!(counts = (PyArrayObject *)PyArray_ZEROS(1, (npy_intp[]){(npy_intp)nJ}, NPY_INTP, 0)))
        goto cleanup;
    if (want_wf && !(wavefunctions = PyList_New(0)))
        goto cleanup;
    size_t n = 0, cap = 0;
    for (size_t j = 0; j < nJ; j++) {
        const int J = Js[j];
        if (J < 0) {
            PyErr_Format(PyExc_ValueError, "J=%d is invalid: rotational quantum numbers are >= 0", J);
            goto cleanup;
        }
        size_t count = 0;
        Py_BEGIN_ALLOW_THREADS
        status = wkb_radial_set(ws, &pot, mu, (double)J * (J + 1), &err);
        count = wkb_radial_count(ws);
        Py_END_ALLOW_THREADS
        if (status) {
            raise_status(&err);
            goto cleanup;
        }
        ((npy_intp *)PyArray_DATA(counts))[j] = (npy_intp)count;
        const size_t want = vv ? nv : count;
        if (max_levels >= 0 && n + want > (size_t)max_levels) {
            PyErr_Format(PyExc_ValueError,
                         "this call would compute %zu exact levels or more, more than the limit max_levels=%zd: ask "
                         "for fewer (a list of v, fewer J values, a smaller reduced mass) or raise max_levels",
                         n + want, max_levels);
            goto cleanup;
        }
        work += (double)want * (double)wkb_radial_grid_size(ws);
        if (exact_work_refused(work, max_work,
                               "ask for fewer (a list of v, fewer J values) or raise it (wkbfit.exact.exact_levels)"))
            goto cleanup;
        for (size_t i = 0; vv && i < nv; i++) {
            if (vv[i] < 0) {
                PyErr_Format(PyExc_ValueError, "v=%d is invalid: vibrational quantum numbers are >= 0", vv[i]);
                goto cleanup;
            }
            if ((size_t)vv[i] >= count) {
                if (count == 0)
                    value_error("v=%d is not bound: this potential binds no level at J=%d for mu=%g u", vv[i], J,
                                mu);
                else
                    value_error("v=%d is above the last bound level (v=%zu) of this potential at J=%d for "
                                "mu=%g u", vv[i], count - 1, J, mu);
                goto cleanup;
            }
        }
        if (n + want > cap) {
            size_t ncap = 2 * (n + want) + 8;
            wkb_radial_level *nl = realloc(lv, ncap * sizeof *lv);
            if (!nl) {
                PyErr_NoMemory();
                goto cleanup;
            }
            lv = nl;
            int *nJs = realloc(lv_J, ncap * sizeof *lv_J);
            if (!nJs) {
                PyErr_NoMemory();
                goto cleanup;
            }
            lv_J = nJs;
            if (want_dVdp) {
                npy_intp dims[2] = {(npy_intp)ncap, (npy_intp)np};
                PyArrayObject *nd = (PyArrayObject *)PyArray_ZEROS(2, dims, NPY_DOUBLE, 0);
                if (!nd)
                    goto cleanup;
                if (dVdp)
                    memcpy(PyArray_DATA(nd), PyArray_DATA(dVdp), n * np * sizeof(double));
                Py_XDECREF(dVdp);
                dVdp = nd;
            }
            cap = ncap;
        }
        double *pd = dVdp ? (double *)PyArray_DATA(dVdp) : NULL;
        if (!want_wf) {
            Py_BEGIN_ALLOW_THREADS
            for (size_t i = 0; i < want && !status; i++)
                status = wkb_radial_level_at(ws, vv ? vv[i] : (int)i, &lv[n + i], pd ? pd + (n + i) * np : NULL,
                                             &err);
            Py_END_ALLOW_THREADS
            if (status) {
                raise_status(&err);
                goto cleanup;
            }
        } else {
            for (size_t i = 0; i < want; i++) {
                const double *r = NULL, *u = NULL;
                size_t m = 0;
                const int v = vv ? vv[i] : (int)i;
                Py_BEGIN_ALLOW_THREADS
                status = wkb_radial_level_at(ws, v, &lv[n + i], pd ? pd + (n + i) * np : NULL, &err);
                if (!status)
                    status = wkb_radial_wavefunction(ws, v, &r, &u, &m, &err);
                Py_END_ALLOW_THREADS
                if (status) {
                    raise_status(&err);
                    goto cleanup;
                }
                PyArrayObject *ra = new_vector((npy_intp)m), *ua = ra ? new_vector((npy_intp)m) : NULL;
                if (!ua) {
                    Py_XDECREF(ra);
                    goto cleanup;
                }
                memcpy(PyArray_DATA(ra), r, m * sizeof(double));
                memcpy(PyArray_DATA(ua), u, m * sizeof(double));
                PyObject *pair = Py_BuildValue("(NN)", ra, ua);
                if (!pair || PyList_Append(wavefunctions, pair) < 0) {
                    Py_XDECREF(pair);
                    goto cleanup;
                }
                Py_DECREF(pair);
            }
        }
        for (size_t i = 0; i < want; i++)
            lv_J[n + i] = J;
        n += want;
    }
    for (int c = 0; c < NCOL; c++) {
        if (!(cols[c] = new_vector((npy_intp)n)))
            goto cleanup;
        double *p = PyArray_DATA(cols[c]);
        for (size_t i = 0; i < n; i++) {
            const wkb_radial_level *L = &lv[i];
            const double vals[NCOL] = {L->v, lv_J[i], L->energy, L->binding, L->r_inner, L->r_outer,
                                       L->Bv, L->dEdv, L->error, (double)L->grid_points};
            p[i] = vals[c];
        }
    }
    if (!(result = PyDict_New()))
        goto cleanup;
    for (int c = 0; c < NCOL; c++)
        if (PyDict_SetItemString(result, names[c], (PyObject *)cols[c]) < 0)
            goto fail;
    if (PyDict_SetItemString(result, "count", (PyObject *)counts) < 0)
        goto fail;
    if (dVdp) {
        PyObject *view = PySequence_GetSlice((PyObject *)dVdp, 0, (Py_ssize_t)n);
        if (dict_steal(result, "dE_dp", view) < 0)
            goto fail;
    }
    if (wavefunctions && PyDict_SetItemString(result, "wavefunctions", wavefunctions) < 0)
        goto fail;
    goto cleanup;
fail:
    Py_CLEAR(result);
cleanup:
    for (int c = 0; c < NCOL; c++)
        Py_XDECREF(cols[c]);
    Py_XDECREF(J_arr);
    Py_XDECREF(v_arr);
    Py_XDECREF(dVdp);
    Py_XDECREF(counts);
    Py_XDECREF(wavefunctions);
    free(lv);
    free(lv_J);
    wkb_radial_free(ws);
    return result;
}

/* ---------------------------------------------------------------- RKR (rkr.c) */

static PyObject *py_rkr(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"G_coefficients", "B_coefficients", "mu", "v", "quadrature_points", NULL};
    enum { NCOL = 6 };
    static const char *names[NCOL] = {"energy", "f", "g", "inner_turning_point", "outer_turning_point", "error"};
    PyObject *G_obj, *B_obj, *v_obj, *result = NULL;
    double mu;
    Py_ssize_t quadrature_points = 0;
    PyArrayObject *G = NULL, *B = NULL, *v = NULL, *cols[NCOL] = {NULL};
    wkb_error err = {0};
    int status;

    if (!PyArg_ParseTupleAndKeywords(args, kwds, "OOdO|n", kwlist, &G_obj, &B_obj, &mu, &v_obj,
                                     &quadrature_points))
        return NULL;
    if (quadrature_points < 0)
        return value_error("quadrature_points=%zd is invalid: use 32, 64, 96, 100, 128, 256, 512 or 1024",
                           quadrature_points);
    if (!(G = as_double_array(G_obj, "G_coefficients", 1)) || !(B = as_double_array(B_obj, "B_coefficients", 1)) ||
        !(v = as_double_array(v_obj, "v", 1)))
        goto cleanup;
    const npy_intp n = PyArray_SIZE(v);
    for (int c = 0; c < NCOL; c++)
        if (!(cols[c] = new_vector(n)))
            goto cleanup;
    {
        double *out[NCOL];
        for (int c = 0; c < NCOL; c++)
            out[c] = PyArray_DATA(cols[c]);
        Py_BEGIN_ALLOW_THREADS
        status = wkb_rkr(PyArray_DATA(G), (size_t)PyArray_SIZE(G), PyArray_DATA(B), (size_t)PyArray_SIZE(B), mu,
                         PyArray_DATA(v), (size_t)n, (size_t)quadrature_points, out[0], out[1], out[2], out[3],
                         out[4], out[5], &err);
        Py_END_ALLOW_THREADS
    }
    if (status) {
        raise_status(&err);
        goto cleanup;
    }
    if (!(result = PyDict_New()))
        goto cleanup;
    for (int c = 0; c < NCOL; c++) {
        Py_INCREF(cols[c]);
        if (dict_steal(result, names[c], (PyObject *)cols[c]) < 0) {
            Py_CLEAR(result);
            goto cleanup;
        }
    }
cleanup:
    for (int c = 0; c < NCOL; c++)
        Py_XDECREF(cols[c]);
    Py_XDECREF(G);
    Py_XDECREF(B);
    Py_XDECREF(v);
    return result;
}

/* ---------------------------------------------------------------- damping functions (damping.c) */

static PyObject *py_damping(PyObject *self, PyObject *args, PyObject *kwds)
{
    static char *kwlist[] = {"kind", "m", "s", "rho", "r", NULL};
    int kind, m, s;
    double rho;
    PyObject *r_obj;
    PyArrayObject *r = NULL, *cols[4] = {NULL};
    PyObject *result = NULL;
    if (!PyArg_ParseTupleAndKeywords(args, kwds, "iiidO", kwlist, &kind, &m, &s, &rho, &r_obj))
        return NULL;
    if (kind < WKB_DAMPING_NONE || kind > WKB_DAMPING_DOUKETIS || m < 1 || m > 64)
        return value_error("damping kind %d (0 none, 1 Tang-Toennies, 2 Douketis) or power m=%d (1..64) is invalid",
                           kind, m);
    if (!(r = as_double_array(r_obj, "r", 1)))
        return NULL;
    const npy_intp n = PyArray_SIZE(r);
    for (int c = 0; c < 4; c++)
        if (!(cols[c] = new_vector(n)))
            goto cleanup;
    {
        const double *pr = PyArray_DATA(r);
        double *o[4];
        for (int c = 0; c < 4; c++)
            o[c] = PyArray_DATA(cols[c]);
        for (npy_intp i = 0; i < n; i++) {
            wkb_damping d;
            wkb_damping_eval(kind, m, s, rho, pr[i], &d);
            o[0][i] = d.D, o[1][i] = d.dD, o[2][i] = d.d2D, o[3][i] = d.dD_drange;
        }
    }
    result = Py_BuildValue("(OOOO)", cols[0], cols[1], cols[2], cols[3]);
cleanup:
    for (int c = 0; c < 4; c++)
        Py_XDECREF(cols[c]);
    Py_XDECREF(r);
    return result;
}

/* ---------------------------------------------------------------- module */

static PyMethodDef core_methods[] = {
    {"models", py_models, METH_NOARGS, "models() -> {model name: tuple of parameter names}"},
    {"potential_values", (PyCFunction)(void (*)(void))py_potential_values, METH_VARARGS | METH_KEYWORDS,
     "potential_values(model, params, r, curve=None) -> (V, dV/dr, d2V/dr2, asymptote - V)"},
    {"param_derivatives", (PyCFunction)(void (*)(void))py_param_derivatives, METH_VARARGS | METH_KEYWORDS,
     "param_derivatives(model, params, r, curve=None) -> array (len(r), n_params) of dV/dp"},
    {"pointwise_build", (PyCFunction)(void (*)(void))py_pointwise_build, METH_VARARGS | METH_KEYWORDS,
     "pointwise_build(r, V, asymptote=nan, tail_power=nan, inner_wall=0) -> (curve, asymptote, tail_power, "
     "tail_coefficient, (wall form, A, B, C))"},
    {"airy", (PyCFunction)(void (*)(void))py_airy, METH_VARARGS | METH_KEYWORDS,
     "airy(z, errors=False) -> (Ai, Ai', Bi, Bi') from GSL, arrays shaped like z; with errors=True\n"
     "((Ai, Ai', Bi, Bi'), (their absolute error estimates)). Valid for -1e6 <= z <= 104."},
    {"airy_asymptotic", (PyCFunction)(void (*)(void))py_airy_asymptotic, METH_VARARGS | METH_KEYWORDS,
     "airy_asymptotic(z, terms) -> Ai(z) from the large-|z| expansions (A&S 10.4.59 for z > 0,\n"
     "10.4.60 for z < 0) truncated after terms = 1..50 coefficients c_0..c_(terms-1)."},
    {"matched_phases", (PyCFunction)(void (*)(void))py_matched_phases, METH_VARARGS | METH_KEYWORDS,
     "matched_phases(model, params, curve, mu, rot, binding, match_fraction=0.5, r_match_inner=0, "
     "r_match_outer=0, milne=True) -> dict: the matched end phases psi and the continuous quantum number at one "
     "energy (milne=False: the exact solution in Pruefer form all the way, no phase-amplitude stretch; milne=2: "
     "rk8pd instead of Magnus steps through the turning region, kept for comparison)"},
    {"wkb_levels", (PyCFunction)(void (*)(void))py_wkb_levels, METH_VARARGS | METH_KEYWORDS,
     "wkb_levels(model, params, curve, mu, rot, v=None, maslov_in=1, maslov_out=1, want_dVdp=False, order=1, "
     "ends=0, match_fraction=0.5, nodes=0, match_rule=0, max_levels=1000000, milne=True, packed=False) "
     "-> dict of level arrays (v, energy, binding_energy, turning points, Bv, dEdv, error, rule, rot_index), vD, "
     "v_th (ends=1 only, else NaN) and count (per rot when rot is an array), [dE_dp]; ends=1 selects matched end "
     "phases, nodes overrides the quadrature rule, match_rule forces 3 (matched) or 4 (exact phase), milne=False "
     "is the earlier end solve (Pruefer form all the way, fixed tolerance), kept for comparison, milne=2 the "
     "end solve before magnus.c (rk8pd through the turning region), kept for comparison; packed=True "
     "returns the tuple (block, rot_index, vD, v_th, count, finite) with the nine columns as rows of one "
     "read-only (9, n) block and finite telling whether every result column is finite"},
    {"wkb_orbits", (PyCFunction)(void (*)(void))py_wkb_orbits, METH_VARARGS | METH_KEYWORDS,
     "wkb_orbits(model, params, curve, mu, rot, binding) -> dict of arrays: action (integral k dr), "
     "half_period (d action/dE, 1/cm-1), inner/outer turning points, Bv; at binding energies asymptote - E"},
    {"quasibound_levels", (PyCFunction)(void (*)(void))py_quasibound_levels, METH_VARARGS | METH_KEYWORDS,
     "quasibound_levels(model, params, curve, mu, rot, order=2, width_form=0, barrier_phase=True, width_phase=True, "
     "complex_position=True, barrier_match_theta=<default>, join_distance=4.0)"},
    {"barrier_integrals", (PyCFunction)(void (*)(void))py_barrier_integrals, METH_VARARGS | METH_KEYWORDS,
     "barrier_integrals(model, params, curve, mu, rot, energy) -> theta, dtheta_dE, action, ..., curvature_integral at each E"},
    {"resonances", (PyCFunction)(void (*)(void))py_resonances, METH_VARARGS | METH_KEYWORDS,
     "resonances(model, params, curve, mu, J, energy, width, phase_step=, r_match=) -> dict of columns"},
    {"set_fit_threads", py_set_fit_threads, METH_VARARGS,
     "set_fit_threads(n) -> previous: threads of the fits' level evaluations from now on (0: the default, the\n"
     "online CPUs for 500 rows or more, else 1; never more than the (mu, J) groups), process-wide"},
    {"_set_fit_interpolation", py_set_fit_interpolation, METH_VARARGS,
     "_set_fit_interpolation(on) -> previous: private switch (benchmarks, tests); False solves every fit row's\n"
     "first-order level directly instead of interpolating rotational ladders in J(J+1) (fit_ladders.c)"},
    {"fit_evaluate", (PyCFunction)(void (*)(void))py_fit_evaluate, METH_VARARGS | METH_KEYWORDS,
     "fit_evaluate(model, params, curve, v, rot, mu, energy_zero=0, method=0, energy_tol=0, jacobian=True) -> (calc, "
     "jacobian[n, n_params] or None):\n"
     "the fit's model levels (energy_zero 0 minimum, 1 asymptote, 2 lowest; method 0 WKB, 1 exact) and d calc/d p\n"
     "(jacobian=False: none; exact levels are then computed without <v|dV/dp|v>, about 1/3 of the cost)"},
    {"tall_qr", (PyCFunction)(void (*)(void))py_tall_qr, METH_VARARGS | METH_KEYWORDS,
     "tall_qr(A, b=None) -> (R, qtb, rest): Householder QR A = Q R of an n x p matrix (n >= p >= 1) on the\n"
     "calling thread (GSL, no threaded BLAS); with b: qtb = (Q^T b)[:p], rest = |(Q^T b)[p:]|^2, else None"},
    {"fit_run", (PyCFunction)(void (*)(void))py_fit_run, METH_VARARGS | METH_KEYWORDS,
     "fit_run(model, params, curve, v, rot, mu, energy, sigma, energy_zero, vary, lower, upper,\n"
     "max_iterations=-1, xtol, gtol, decrease_tol, method=0, offset=None) -> dict (params, calc, jacobian, chi_square, iterations,\n"
     "n_eval, n_infeasible, n_orbits, stop, test, predicted_decrease, last_infeasible); a failure at the start raises\n"
     "ValueError(message, row index)"},
    {"fit_replicas", (PyCFunction)(void (*)(void))py_fit_replicas, METH_VARARGS | METH_KEYWORDS,
     "fit_replicas(model, params, curve, v, rot, mu, sigma, energy_zero, vary, lower, upper, energies[n_rep, n],\n"
     "counts=None, shift_mu, shift_rot, shift_v, shift, slope=None, pred_mu=0, pred_v=None, max_iterations=-1)\n"
     "-> dict (params[n_rep, n_params], pred_energy[n_rep, len(pred_v)], status, stop, chi_square, iterations,\n"
     "pred_count, vD, asymptote, extrapolated, message): one first-order fit per replica from params, levels\n"
     "corrected by shift + slope (p - params) (replica_fit.c); status < 0: the predictions failed"},
    {"fit_run_rows", (PyCFunction)(void (*)(void))py_fit_run_rows, METH_VARARGS | METH_KEYWORDS,
     "fit_run_rows(model, params, curve, level_v, level_rot, level_mu, level_a, coef_a, level_b, coef_b,\n"
     "coef_asymptote, extra_index, coef_extra, offset, observed, sigma, extra_start, vary, lower, upper,\n"
     "max_iterations=-1, method=0) -> dict (params, extra, calc, jacobian[n, n_params + n_extra], chi_square, ...,\n"
     "n_level_calculations): a fit to rows that are linear combinations of distinct levels; a failure at the\n"
     "start raises ValueError(message, level index)"},
    {"exact_levels", (PyCFunction)(void (*)(void))py_exact_levels, METH_VARARGS | METH_KEYWORDS,
     "exact_levels(model, params, curve, mu, J, v=None, want_dVdp=False, want_wavefunctions=False,\n"
     "energy_tol=1e-7, min_binding=1e-7, phase_step=0) -> dict of arrays (v, J, energy, binding_energy,\n"
     "turning points, Bv, dEdv, error, grid_points), count[len(J)], [dE_dp], [wavefunctions: (r, u)]:\n"
     "bound levels of the radial Schroedinger equation for each J (every level, or those in v)"},
    {"fit_levels", (PyCFunction)(void (*)(void))py_fit_levels, METH_VARARGS | METH_KEYWORDS,
     "fit_levels(model, params, curve, mu, rot, method=0) -> dict (energy, jacobian[count, n_params], vD, dvD_dp,\n"
     "asymptote): every bound level (0 WKB, 1 exact) with its parameter gradient; vD is the WKB one"},
    {"damping", (PyCFunction)(void (*)(void))py_damping, METH_VARARGS | METH_KEYWORDS,
     "damping(kind, m, s, rho, r) -> (D, dD/dr, d2D/dr2, dD/drho): damping function D_m(r) (r in angstrom;\n"
     "kind 0 none, 1 Tang-Toennies with b = rho in 1/angstrom, 2 Douketis type with dimensionless rho, s = -1, -2)"},
    {"rkr", (PyCFunction)(void (*)(void))py_rkr, METH_VARARGS | METH_KEYWORDS,
     "rkr(G_coefficients, B_coefficients, mu, v, quadrature_points=0) -> dict of arrays (energy, f, g,\n"
     "inner_turning_point, outer_turning_point, error): RKR turning points from Dunham expansions\n"
     "G = sum Y_k0 (v+1/2)^k (k >= 1) and B = sum Y_k1 (v+1/2)^k (k >= 0), cm-1, A, u"},
    {NULL, NULL, 0, NULL},
};

static int import_numpy(void)
{
    import_array1(-1);
    return 0;
}

static int core_exec(PyObject *m)
{
    if (import_numpy() < 0)
        return -1;
    wkb_init_library();
    if (PyModule_AddObject(m, "HBAR2_OVER_2U", PyFloat_FromDouble(WKB_HBAR2_OVER_2U)) < 0)
        return -1;
    if (PyModule_AddObject(m, "MAX_EXACT_WORK", PyFloat_FromDouble(WKB_MAX_EXACT_WORK)) < 0)
        return -1;
    if (PyModule_AddStringConstant(m, "GSL_VERSION", GSL_VERSION) < 0)
        return -1;
    return 0;
}

static PyModuleDef_Slot core_slots[] = {
    {Py_mod_exec, core_exec},
    {0, NULL},
};

static struct PyModuleDef core_module = {
    PyModuleDef_HEAD_INIT, "wkbfit._core",
    "The C core of wkbfit: potentials, WKB levels, exact levels and fits (arrays in, arrays out).", 0,
    core_methods, core_slots, NULL, NULL, NULL,
};

PyMODINIT_FUNC PyInit__core(void)
{
    return PyModuleDef_Init(&core_module);
}
