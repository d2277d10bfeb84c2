/* The scalar hypergeometric tails of service/sampling/hypergeometric.py, compiled.
 *
 * lower(k, N, M, n) gives (P(X <= k), P(X > k)) for k inside the support
 * (max(0, n - (N - M)) <= k < min(n, M)) and 1 <= N < 2^53, by the very operations of
 * the module's _lower_one and _tail_one, in the same order, on the same doubles: the
 * results are the same bits (tests/unit/sampling/test_hypergeometric_compiled.py checks
 * it). It answers None, and the Python code decides, whenever it could not give those
 * bits: a tail longer than the module's _SCALAR_TERMS (summed there in numpy blocks), or
 * an integer product in a ratio beyond 2^53 (which Python divides exactly, not in
 * doubles).
 *
 * Built with -ffp-contract=off: a fused multiply-add rounds once where Python rounds
 * twice. math.log, math.exp and math.sqrt in Python are the C library's log, exp and
 * sqrt, called here directly.
 */

#define PY_SSIZE_T_CLEAN
#include <Python.h>
#include <math.h>
#include <stdint.h>

#define SCALAR_TERMS 256
#define TOLERANCE 1e-17
#define EXACT_LIMIT 9007199254740992.0 /* 2^53 */

static const double TWO_PI = 2.0 * 3.14159265358979323846;
static const double S0 = 1.0 / 12.0;
static const double S1 = 1.0 / 360.0;
static const double S2 = 1.0 / 1260.0;
static const double S3 = 1.0 / 1680.0;
static const double S4 = 1.0 / 1188.0;
static const double S5 = 691.0 / 360360.0;
static const double S6 = 1.0 / 156.0;

/* delta(m) for m = 0..15, given once by the Python module (configure). */
static double stirling_table[16];
static int configured = 0;

typedef __int128 wide;

static double stirling_error(int64_t m)
{
    if (m <= 15) {
        return stirling_table[m];
    }
    double s = 1.0 / (double)m;
    double s2 = s * s;
    return s * (S0 - s2 * (S1 - s2 * (S2 - s2 * (S3 - s2 * (S4 - s2 * (S5 - s2 * S6))))));
}

static double deviance(double x, double mean)
{
    double d = x - mean;
    double total = x + mean;
    if (fabs(d) < 0.1 * total) {
        double v = d / total;
        double s = d * v;
        double term = 2.0 * x * v;
        double v2 = v * v;
        for (int j = 3; j < 41; j += 2) {
            term *= v2;
            double following = s + term / (double)j;
            if (following == s) {
                break;
            }
            s = following;
        }
        return s;
    }
    if (x == 0.0) {
        return mean;
    }
    return x * log(x / mean) + mean - x;
}

static void binomial_parts(int64_t x, int64_t m, double p, double q, double *c, double *w)
{
    *c = stirling_error(m)
         - stirling_error(x)
         - stirling_error(m - x)
         - deviance((double)x, (double)m * p)
         - deviance((double)(m - x), (double)m * q);
    *w = (x == 0 || x == m) ? 1.0 : TWO_PI * (double)x * (double)(m - x) / (double)m;
}

static double pmf_one(int64_t x, int64_t total, int64_t marked, int64_t drawn)
{
    double p = (double)drawn / (double)total;
    double q = (double)(total - drawn) / (double)total;
    double c1, w1, c2, w2, c3, w3;
    binomial_parts(x, marked, p, q, &c1, &w1);
    binomial_parts(drawn - x, total - marked, p, q, &c2, &w2);
    binomial_parts(drawn, total, p, q, &c3, &w3);
    return exp(c1 + c2 - c3) * sqrt(w3 / (w1 * w2));
}

static int exact_double(wide value)
{
    return value <= (wide)EXACT_LIMIT && value >= -(wide)EXACT_LIMIT;
}

/* P(X >= start) (up) or P(X <= start) into *result; 0 when the Python code must decide. */
static int tail_one(int64_t start, int up, int64_t steps, int64_t total, int64_t marked,
                    int64_t drawn, double *result)
{
    int64_t rest = total - marked - drawn;
    double term = 1.0, acc = 1.0;
    int64_t x = start;
    int64_t count = steps < SCALAR_TERMS ? steps : SCALAR_TERMS;
    for (int64_t i = 0; i < count; i++) {
        wide numerator, denominator;
        if (up) {
            numerator = (wide)(marked - x) * (wide)(drawn - x);
            denominator = (wide)(x + 1) * (wide)(rest + x + 1);
            x += 1;
        } else {
            numerator = (wide)x * (wide)(rest + x);
            denominator = (wide)(marked - x + 1) * (wide)(drawn - x + 1);
            x -= 1;
        }
        if (!exact_double(numerator) || !exact_double(denominator)) {
            return 0;
        }
        double ratio = (double)numerator / (double)denominator;
        term *= ratio;
        acc += term;
        if (term == 0.0 || (ratio < 1.0 && term * ratio <= TOLERANCE * acc * (1.0 - ratio))) {
            steps = 0;
            break;
        }
        steps -= 1;
    }
    if (steps > 0) {
        return 0;
    }
    *result = pmf_one(start, total, marked, drawn) * acc;
    return 1;
}

static PyObject *lower(PyObject *self, PyObject *args)
{
    PyObject *given[4];
    long long value[4];
    if (!PyArg_UnpackTuple(args, "lower", 4, 4, &given[0], &given[1], &given[2], &given[3])) {
        return NULL;
    }
    for (int i = 0; i < 4; i++) {
        int overflow = 0;
        value[i] = PyLong_AsLongLongAndOverflow(given[i], &overflow);
        if (value[i] == -1 && PyErr_Occurred()) {
            return NULL;
        }
        if (overflow) {
            Py_RETURN_NONE; /* beyond 64 bits: outside the domain or the support */
        }
    }
    long long k = value[0], total = value[1], marked = value[2], drawn = value[3];
    if (!configured || total < 1 || (double)total >= EXACT_LIMIT || marked < 0
        || marked > total || drawn < 0 || drawn > total) {
        Py_RETURN_NONE;
    }
    int64_t low = drawn - (total - marked);
    if (low < 0) {
        low = 0;
    }
    int64_t high = drawn < marked ? drawn : marked;
    if (k < low || k >= high) {
        Py_RETURN_NONE;
    }
    double tail;
    if ((wide)(k + 1) * (wide)(total + 2) < (wide)(marked + 1) * (wide)(drawn + 1)) {
        if (!tail_one(k, 0, k - low, total, marked, drawn, &tail)) {
            Py_RETURN_NONE;
        }
        double below = tail < 1.0 ? tail : 1.0;
        return Py_BuildValue("(dd)", below, 1.0 - below);
    }
    if (!tail_one(k + 1, 1, high - k - 1, total, marked, drawn, &tail)) {
        Py_RETURN_NONE;
    }
    double above = tail < 1.0 ? tail : 1.0;
    return Py_BuildValue("(dd)", 1.0 - above, above);
}

static PyObject *configure(PyObject *self, PyObject *args)
{
    PyObject *values;
    if (!PyArg_ParseTuple(args, "O", &values)) {
        return NULL;
    }
    PyObject *items = PySequence_Fast(values, "the Stirling errors must be a sequence");
    if (items == NULL) {
        return NULL;
    }
    if (PySequence_Fast_GET_SIZE(items) != 16) {
        Py_DECREF(items);
        PyErr_SetString(PyExc_ValueError, "the Stirling errors must be 16 values");
        return NULL;
    }
    double table[16];
    for (Py_ssize_t i = 0; i < 16; i++) {
        table[i] = PyFloat_AsDouble(PySequence_Fast_GET_ITEM(items, i));
        if (table[i] == -1.0 && PyErr_Occurred()) {
            Py_DECREF(items);
            return NULL;
        }
    }
    Py_DECREF(items);
    for (int i = 0; i < 16; i++) {
        stirling_table[i] = table[i];
    }
    configured = 1;
    Py_RETURN_NONE;
}

static PyMethodDef methods[] = {
    {"lower", lower, METH_VARARGS,
     "lower(k, N, M, n): (P(X <= k), P(X > k)) as the Python module computes them, "
     "or None where the Python module must compute them."},
    {"configure", configure, METH_VARARGS,
     "configure(table): the Stirling errors delta(0) ... delta(15)."},
    {NULL, NULL, 0, NULL},
};

static struct PyModuleDef module = {
    PyModuleDef_HEAD_INIT, "_hypergeometric_tails",
    "The scalar hypergeometric tails of service.sampling.hypergeometric, compiled.", -1,
    methods,
};

PyMODINIT_FUNC PyInit__hypergeometric_tails(void)
{
    return PyModule_Create(&module);
}
