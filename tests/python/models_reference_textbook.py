"""The naive float64 textbook formulas of every model-level function
(NumPy, evaluated on the same inputs as the library): their errors fill the
second column of the accuracy table and test_textbook_is_worse_on_some_hard_case
asserts that the library beats them where it matters."""

from __future__ import annotations

import numpy as np


# ====================================================== textbook float64


def _dot(a, b):
    return np.sum(a * b, axis=-1, keepdims=True)


def tb_mobius_add(x, y, k):
    xy, xx, yy = _dot(x, y), _dot(x, x), _dot(y, y)
    return ((1 + 2 * k * xy + k * yy) * x + (1 - k * xx) * y) / (1 + 2 * k * xy + k * k * xx * yy)


def tb_mobius_scale(r, x, k):
    n = np.sqrt(_dot(x, x))
    sk = np.sqrt(k)
    return np.tanh(r * np.arctanh(sk * n)) * x / (sk * n)


def tb_lambda(x, k):
    return 2 / (1 - k * _dot(x, x))


def tb_gyration(a, b, w, k):
    # common practice: the closed form of the Möbius gyration in float64
    # (from memory; the same closed form as mp_models.mobius_gyration_closed).
    ab, aw, bw, aa, bb = _dot(a, b), _dot(a, w), _dot(b, w), _dot(a, a), _dot(b, b)
    big_a = -k * aw * bb + bw + 2 * k * ab * bw
    big_b = -k * bw * aa - aw
    return w + 2 * k * (big_a * a + big_b * b) / (1 + 2 * k * ab + k * k * aa * bb)


def tb_p_distance(x, y, k):
    arg = 1 + 2 * k * _dot(x - y, x - y) / ((1 - k * _dot(x, x)) * (1 - k * _dot(y, y)))
    return (np.arccosh(arg) / np.sqrt(k))[..., 0]


def tb_p_exp(v, x, k):
    n = np.sqrt(_dot(v, v))
    sk = np.sqrt(k)
    return tb_mobius_add(x, np.tanh(sk * tb_lambda(x, k) * n / 2) * v / (sk * n), k)


def tb_p_log(y, x, k):
    u = tb_mobius_add(-x, y, k)
    n = np.sqrt(_dot(u, u))
    sk = np.sqrt(k)
    return 2 / (sk * tb_lambda(x, k)) * np.arctanh(sk * n) * u / n


def tb_p_transport(v, s, e, k):
    return tb_lambda(s, k) / tb_lambda(e, k) * tb_gyration(e, -s, v, k)


def tb_p_geodesic(x, y, t, k):
    return tb_mobius_add(x, tb_mobius_scale(t[:, None], tb_mobius_add(-x, y, k), k), k)


def tb_project(x, margin, k):
    n = np.sqrt(_dot(x, x))
    lim = (1 - margin) / np.sqrt(k)
    return np.where(n > lim, x * (lim / n), x)


def tb_matvec(m, x, k):
    mx = x @ m.T
    nx, nmx = np.sqrt(_dot(x, x)), np.sqrt(_dot(mx, mx))
    sk = np.sqrt(k)
    return np.tanh(nmx / nx * np.arctanh(sk * nx)) * mx / (sk * nmx)


def tb_k2p(x, k):
    return x / (1 + np.sqrt(1 - k * _dot(x, x)))


def tb_p2k(p, k):
    return 2 * p / (1 + k * _dot(p, p))


def tb_dk2p(x, v, k):
    s = np.sqrt(1 - k * _dot(x, x))
    return v / (1 + s) + k * _dot(x, v) * x / (s * (1 + s) ** 2)


def tb_dp2k(p, w, k):
    q = 1 + k * _dot(p, p)
    return 2 * w / q - 4 * k * _dot(p, w) * p / q ** 2


def tb_k_distance(x, y, k):
    arg = (1 - k * _dot(x, y)) / np.sqrt((1 - k * _dot(x, x)) * (1 - k * _dot(y, y)))
    return (np.arccosh(arg) / np.sqrt(k))[..., 0]


def tb_k_exp(v, x, k):
    p = tb_k2p(x, k)
    return tb_p2k(tb_p_exp(tb_dk2p(x, v, k), p, k), k)


def tb_k_log(y, x, k):
    p, q = tb_k2p(x, k), tb_k2p(y, k)
    return tb_dp2k(p, tb_p_log(q, p, k), k)


def tb_k_transport(v, s, e, k):
    ps, pe = tb_k2p(s, k), tb_k2p(e, k)
    return tb_dp2k(pe, tb_p_transport(tb_dk2p(s, v, k), ps, pe, k), k)


def tb_k_geodesic(x, y, t, k):
    return tb_p2k(tb_p_geodesic(tb_k2p(x, k), tb_k2p(y, k), t, k), k)


def tb_mink(u, v):
    return -u[..., :1] * v[..., :1] + _dot(u[..., 1:], v[..., 1:])


def tb_h_distance(x, y, k):
    return (np.arccosh(-k * tb_mink(x, y)) / np.sqrt(k))[..., 0]


def tb_h_exp(v, x, k):
    n = np.sqrt(tb_mink(v, v))
    sk = np.sqrt(k)
    return np.cosh(sk * n) * x + np.sinh(sk * n) / (sk * n) * v


def tb_h_log(y, x, k):
    w = y + k * tb_mink(x, y) * x
    return tb_h_distance(x, y, k)[:, None] * w / np.sqrt(tb_mink(w, w))


def tb_h_transport(v, s, e, k):
    return v + tb_mink(e, v) / (1 / k - tb_mink(s, e)) * (s + e)


def tb_h_geodesic(x, y, t, k):
    big_d = (tb_h_distance(x, y, k) * np.sqrt(k))[:, None]
    t = t[:, None]
    return (np.sinh((1 - t) * big_d) * x + np.sinh(t * big_d) * y) / np.sinh(big_d)


def tb_h_project(x, k):
    return np.concatenate([np.sqrt(1 / k + _dot(x[:, 1:], x[:, 1:])), x[:, 1:]], axis=1)


def tb_u_distance(x, y, k):
    arg = 1 + _dot(x - y, x - y) / (2 * x[:, -1:] * y[:, -1:])
    return (np.arccosh(arg) / np.sqrt(k))[..., 0]


def tb_convert(x, src, dst, k):
    big_r = 1 / np.sqrt(k)
    sk = np.sqrt(k)

    def p2u(p):
        z = sk * p
        z[:, -1] += 1
        y = 2 * z / _dot(z, z)
        y[:, -1] -= 1
        return y / sk

    if src == "poincare":
        p = x
    elif src == "klein":
        p = tb_k2p(x, k)
    elif src == "hyperboloid":
        p = x[:, 1:] / (1 + x[:, :1] / big_r)
    else:
        p = p2u(x.copy())
    if dst == "poincare":
        return p
    if dst == "klein":
        return tb_p2k(p, k)
    if dst == "hyperboloid":
        pp = _dot(p, p)
        g = 1 - k * pp
        return np.concatenate([big_r * (1 + k * pp) / g, 2 * p / g], axis=1)
    return p2u(p.copy())
