#!/usr/bin/python3
"""Writes tests/reference/nn_fixture.txt: encoder -> decoder networks with tangents, their loss,
every parameter gradient and a 20-step Adam loss trajectory, computed by PyTorch autograd in float64.

Source: PyTorch (Debian package python3-torch 1.13), torch.autograd and torch.optim.Adam, float64.
Run from the repository root:  /usr/bin/python3 tests/reference/make_nn_fixture.py

The tangents are torch's own derivatives along a curve, not our propagation formulas: for the
stacked input (x, x', x'') the encoder is evaluated on x(t) = x + t x' + t^2/2 x'' and
    z' = d/dt enc(x(t)) |_{t=0},    z'' = d^2/dt^2 enc(x(t)) |_{t=0},
each derivative taken with torch.autograd.functional.jvp (create_graph=True, nested for the second),
so that the loss stays differentiable in the parameters. The decoder is evaluated the same way on
z(t) = z + t z' + t^2/2 z'' (its inputs are the encoder's outputs, as in training).

Networks (same as ours): hidden layers y = act(h W + b), a linear last layer, W of shape
(n_in, n_out). Loss (every squared term a mean over batch and components):
    mean|x - x_hat|^2 + w1 mean|x' - x_hat'|^2 [+ w2 mean|x'' - x_hat''|^2]
    + wz1 mean|z' - c1|^2 [+ wz2 mean|z'' - c2|^2]
Weights, biases, inputs and latent targets are drawn with numpy's default_rng(seed) and rounded to
float32, so that the float32 code under test reads exactly the same numbers.

Format: '#' lines are comments; every entry is a line "name rows cols" followed by rows lines of
cols values (%.17g), row-major. Names: <case>/X (k*B, n) the stacked input, <case>/c1, <case>/c2
the latent targets, <case>/<param> the initial parameter values (our names: enc.W0, enc.b0, ...),
<case>/Z and <case>/XH the stacked outputs, <case>/loss, <case>/grad/<param>, and <case>/adam_loss
(1, 21): the loss before each of 20 Adam steps (lr 1e-2, default betas, eps 1e-8) and after the last.
"""
import os

import numpy as np
import torch

torch.set_default_dtype(torch.float64)

# name, k, B, encoder widths, decoder widths, encoder act, decoder act, seed
CASES = [
    ("o1_sigmoid", 2, 4, [6, 5, 2], [2, 5, 6], "sigmoid", "sigmoid", 1),
    ("o2_sigmoid", 3, 4, [7, 6, 4, 2], [2, 4, 6, 7], "sigmoid", "sigmoid", 2),
    ("o2_tanh_silu", 3, 3, [5, 6, 3], [3, 6, 5], "tanh", "silu", 3),
    ("o2_softplus", 3, 3, [5, 4, 2], [2, 4, 5], "softplus", "softplus", 4),
]
W_X = [1.0, 0.5, 0.25]   # weights of the reconstruction terms of x, x', x''
W_Z = [0.3, 0.2]         # weights of the latent terms of z', z''
ADAM_STEPS = 20
ADAM_LR = 1e-2

ACTS = {
    "sigmoid": torch.sigmoid,
    "tanh": torch.tanh,
    "softplus": torch.nn.functional.softplus,
    "silu": torch.nn.functional.silu,
}


def f32(a):
    """Round to float32 and back, so both sides start from identical numbers."""
    return np.asarray(a, dtype=np.float32).astype(np.float64)


def make_params(rng, prefix, widths):
    params = []
    for l in range(len(widths) - 1):
        r = np.sqrt(6.0 / (widths[l] + widths[l + 1]))
        W = f32(rng.uniform(-r, r, size=(widths[l], widths[l + 1])))
        b = f32(rng.uniform(-0.3, 0.3, size=(1, widths[l + 1])))
        params.append(("%s.W%d" % (prefix, l), W))
        params.append(("%s.b%d" % (prefix, l), b))
    return params


def mlp(tensors, act, h):
    n = len(tensors) // 2
    for l in range(n):
        h = h @ tensors[2 * l] + tensors[2 * l + 1]
        if l < n - 1:
            h = act(h)
    return h


def along_curve(f, blocks):
    """(f(p), d/dt f, d^2/dt^2 f) at t = 0 along p(t) = p + t p' + t^2/2 p'', by torch autograd."""
    k = len(blocks)

    def curve(t):
        p = blocks[0] + t * blocks[1]
        if k == 3:
            p = p + 0.5 * t * t * blocks[2]
        return f(p)

    t0 = torch.zeros(())
    one = torch.ones(())

    def d1(t):
        return torch.autograd.functional.jvp(curve, t, one, create_graph=True)[1]

    out = [curve(t0), d1(t0)]
    if k == 3:
        out.append(torch.autograd.functional.jvp(d1, t0, one, create_graph=True)[1])
    return out


def loss_fn(case, tensors, n_enc, X, c1, c2):
    name, k, B, we, wd, ae, ad, seed = case
    xs = [X[j * B:(j + 1) * B] for j in range(k)]
    zs = along_curve(lambda p: mlp(tensors[:n_enc], ACTS[ae], p), xs)
    xh = along_curve(lambda p: mlp(tensors[n_enc:], ACTS[ad], p), zs)
    loss = sum(W_X[j] * ((xs[j] - xh[j]) ** 2).mean() for j in range(k))
    loss = loss + W_Z[0] * ((zs[1] - c1) ** 2).mean()
    if k == 3:
        loss = loss + W_Z[1] * ((zs[2] - c2) ** 2).mean()
    return loss, torch.cat(zs), torch.cat(xh)


def write(f, name, a):
    a = np.atleast_2d(np.asarray(a, dtype=np.float64))
    f.write("%s %d %d\n" % (name, a.shape[0], a.shape[1]))
    for row in a:
        f.write(" ".join("%.17g" % v for v in row) + "\n")


def run_case(f, case):
    name, k, B, we, wd, ae, ad, seed = case
    rng = np.random.default_rng(seed)
    params = make_params(rng, "enc", we) + make_params(rng, "dec", wd)
    X = f32(rng.uniform(-1, 1, size=(k * B, we[0])))
    c1 = f32(rng.uniform(-0.5, 0.5, size=(B, we[-1])))
    c2 = f32(rng.uniform(-0.5, 0.5, size=(B, we[-1])))
    f.write("# case %s: k = %d, B = %d, encoder %s %s, decoder %s %s, linear last layers\n"
            % (name, k, B, "-".join(map(str, we)), ae, "-".join(map(str, wd)), ad))
    write(f, name + "/X", X)
    write(f, name + "/c1", c1)
    write(f, name + "/c2", c2)
    for pname, v in params:
        write(f, "%s/%s" % (name, pname), v)

    tensors = [torch.tensor(v, requires_grad=True) for _, v in params]
    n_enc = 2 * (len(we) - 1)
    Xt, c1t, c2t = torch.tensor(X), torch.tensor(c1), torch.tensor(c2)
    loss, Z, XH = loss_fn(case, tensors, n_enc, Xt, c1t, c2t)
    grads = torch.autograd.grad(loss, tensors)
    write(f, name + "/Z", Z.detach().numpy())
    write(f, name + "/XH", XH.detach().numpy())
    write(f, name + "/loss", [[loss.item()]])
    for (pname, _), g in zip(params, grads):
        write(f, "%s/grad/%s" % (name, pname), g.numpy())

    opt = torch.optim.Adam(tensors, lr=ADAM_LR, betas=(0.9, 0.999), eps=1e-8)
    losses = []
    for _ in range(ADAM_STEPS):
        opt.zero_grad()
        loss = loss_fn(case, tensors, n_enc, Xt, c1t, c2t)[0]
        losses.append(loss.item())
        loss.backward()
        opt.step()
    losses.append(loss_fn(case, tensors, n_enc, Xt, c1t, c2t)[0].item())
    write(f, name + "/adam_loss", [losses])


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    with open(os.path.join(here, "nn_fixture.txt"), "w") as f:
        f.write("# written by tests/reference/make_nn_fixture.py: PyTorch %s autograd, float64\n"
                % torch.__version__)
        f.write("# loss weights: x %g, x' %g, x'' %g; latent z' %g, z'' %g; Adam lr %g, %d steps\n"
                % (W_X[0], W_X[1], W_X[2], W_Z[0], W_Z[1], ADAM_LR, ADAM_STEPS))
        for case in CASES:
            run_case(f, case)


if __name__ == "__main__":
    main()
