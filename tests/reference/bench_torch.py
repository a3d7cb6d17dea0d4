#!/usr/bin/python3
"""The reference side of tests/bench_compare.c (`make bench`): the same model, loss and epoch loop as
framelaw's training, written in PyTorch the way a practitioner would, timed per epoch.

Run by the benchmark as a child process, once per setting (thread count, OMP_WAIT_POLICY); it can
also be run by hand, e.g. from the repository root on the data that
`build/tests/bench_compare --only V --keep` leaves behind (it prints the folder, DIR):
    /usr/bin/python3 tests/reference/bench_torch.py --data DIR/V.u8 --frames 10260 --n 2304 \
        --recordings 10 --order 2 --latent 1 --widths 64,32 --degree 3 --trig 1 --batch 256 --threads 2
(the video workload V: 48x48 frames, encoder 2304-64-32-1; the benchmark always passes --batch).

Data: a raw file of uint8 frames, (frames, n) row-major, in equally long recordings. Each batch is
gathered from the uint8 tensor and converted to float32 with the central-difference stencil, as
framelaw's gather does:  x = q[f] / 255,  x' = (q[f+1] - q[f-1]) / (2 dt 255),
x'' = (q[f+1] - 2 q[f] + q[f-1]) / (dt^2 255), for sample frames f whose neighbours lie in the same
recording; the samples are shuffled every epoch (torch.randperm).

Model (float32): encoder n-w1-...-latent and the mirrored decoder, sigmoid hidden layers, linear last
layers, weights (n_in, n_out) Glorot-uniform, zero biases; library Theta(s) with s = z (first order)
or (z, z') (second order): the constant, every monomial of total degree 1..degree (sorted index
tuples), and with --trig 1 sin of every variable; coefficients Xi (n_terms, latent), zero at the
start, times a mask of ones.

Tangents are propagated forward by hand through the layers (forward mode written out, the way the
method's practitioners do it; torch.autograd.functional.jvp would nest a double-backward per step and
is far slower): with a = h W + b, u = h' W, v = h'' W,
    y = s(a),  y' = s'(a) u,  y'' = s''(a) u^2 + s'(a) v,
separate products for h, h', h'' (three torch.addmm / matmul calls per layer; the decoder's last
layer skips h' W in the second-order model, whose loss does not read x_hat', as framelaw does).
Reverse mode is torch autograd through all of it.

Loss, every squared term a mean over batch and components:
  first order:   |x - x_hat|^2 + w_dx |x' - x_hat'|^2 + w_dz |z' - Theta(z) Xi|^2 + w_l1 |Xi|_1
  second order:  |x - x_hat|^2 + w_dx |x'' - x_hat''|^2 + w_dz |z'' - Theta(z, z') Xi|^2 + w_l1 |Xi|_1
with the decoder fed (z, Theta(z) Xi) resp. (z, z', Theta(z, z') Xi). torch.optim.Adam (lr 1e-3,
betas 0.9, 0.999, eps 1e-8), zero_grad / backward / step per batch.

Output (stdout, one line each): "torch VERSION", "threads N", "epoch SECONDS" per timed epoch
(after --warmup untimed epochs; with --max-seconds, at least 3 and none more once that much time is
timed), "loss FIRST LAST" (mean loss of the first and last epoch), "peak_rss_kb KB"
(resource.getrusage ru_maxrss).
"""
import argparse
import itertools
import resource
import time

import numpy as np
import torch


def parse():
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--data", required=True)
    p.add_argument("--frames", type=int, required=True)
    p.add_argument("--n", type=int, required=True)
    p.add_argument("--recordings", type=int, required=True)
    p.add_argument("--order", type=int, required=True)
    p.add_argument("--latent", type=int, required=True)
    p.add_argument("--widths", required=True, help="hidden widths of the encoder, comma-separated")
    p.add_argument("--degree", type=int, default=3)
    p.add_argument("--trig", type=int, default=0)
    p.add_argument("--fps", type=float, default=30.0)
    p.add_argument("--batch", type=int, default=256, help="samples per step (bench_compare passes its own)")
    p.add_argument("--epochs", type=int, default=5)
    p.add_argument("--warmup", type=int, default=1)
    p.add_argument("--threads", type=int, default=1)
    p.add_argument("--max-seconds", type=float, default=0,
                   help="stop after this many timed seconds once 3 epochs are timed (0: no limit)")
    p.add_argument("--w", default="1,1e-4,1e-3,1e-5", help="loss weights rec,dx,dz,l1")
    p.add_argument("--lr", type=float, default=1e-3)
    p.add_argument("--seed", type=int, default=1)
    return p.parse_args()


def glorot(n_in, n_out, gen):
    r = (6.0 / (n_in + n_out)) ** 0.5
    return ((torch.rand(n_in, n_out, generator=gen) * 2 - 1) * r).requires_grad_()


class Mlp:
    """Dense layers with tangents; hidden layers sigmoid, the last linear."""

    def __init__(self, widths, gen):
        self.W = [glorot(widths[l], widths[l + 1], gen) for l in range(len(widths) - 1)]
        self.b = [torch.zeros(widths[l + 1], requires_grad=True) for l in range(len(widths) - 1)]

    def params(self):
        return self.W + self.b

    def __call__(self, h, hd, hdd, last_d=True):
        """last_d=False: the last layer skips h' W (the second-order loss does not read x_hat')."""
        last = len(self.W) - 1
        for l, (W, b) in enumerate(zip(self.W, self.b)):
            a = torch.addmm(b, h, W)
            if l == last:
                return a, hd @ W if last_d else None, hdd @ W if hdd is not None else None
            u = hd @ W
            v = hdd @ W if hdd is not None else None
            s = torch.sigmoid(a)
            s1 = s * (1 - s)
            h, hd = s, s1 * u
            if v is not None:
                s2 = s1 * (1 - 2 * s)
                hdd = s2 * u * u + s1 * v


def library_terms(n_vars, degree, trig):
    terms = [("const",)]
    for d in range(1, degree + 1):
        terms += [("mono", t) for t in itertools.combinations_with_replacement(range(n_vars), d)]
    if trig:
        terms += [("sin", i) for i in range(n_vars)]
    return terms


def theta(terms, s):
    cols = []
    for t in terms:
        if t[0] == "const":
            cols.append(torch.ones(s.shape[0]))
        elif t[0] == "mono":
            c = s[:, t[1][0]]
            for i in t[1][1:]:
                c = c * s[:, i]
            cols.append(c)
        else:
            cols.append(torch.sin(s[:, t[1]]))
    return torch.stack(cols, dim=1)


def main():
    a = parse()
    torch.set_num_threads(a.threads)
    gen = torch.Generator().manual_seed(a.seed)
    torch.manual_seed(a.seed)
    q = torch.from_numpy(np.fromfile(a.data, dtype=np.uint8).reshape(a.frames, a.n))
    per = a.frames // a.recordings
    valid = torch.tensor([r * per + f for r in range(a.recordings) for f in range(1, per - 1)], dtype=torch.long)
    dt = 1.0 / a.fps
    g0, g1, g2 = 1.0 / 255, 0.5 / (dt * 255), 1.0 / (dt * dt * 255)
    w_rec, w_dx, w_dz, w_l1 = (float(v) for v in a.w.split(","))

    hidden = [int(v) for v in a.widths.split(",")]
    enc = Mlp([a.n] + hidden + [a.latent], gen)
    dec = Mlp([a.latent] + hidden[::-1] + [a.n], gen)
    terms = library_terms(a.order * a.latent, a.degree, a.trig)
    xi = torch.zeros(len(terms), a.latent, requires_grad=True)
    mask = torch.ones(len(terms), a.latent)
    opt = torch.optim.Adam(enc.params() + dec.params() + [xi], lr=a.lr, betas=(0.9, 0.999), eps=1e-8)

    def step(f):
        q0, q1, q2 = q[f - 1].float(), q[f].float(), q[f + 1].float()
        x = q1 * g0
        xd = (q2 - q0) * g1
        xdd = (q2 - 2 * q1 + q0) * g2 if a.order == 2 else None
        z, zd, zdd = enc(x, xd, xdd)
        xim = xi * mask
        if a.order == 1:
            pred = theta(terms, z) @ xim
            xh, xhd, _ = dec(z, pred, None)
            ldx = torch.mean((xd - xhd) ** 2)
            ldz = torch.mean((zd - pred) ** 2)
        else:
            pred = theta(terms, torch.cat([z, zd], dim=1)) @ xim
            xh, _, xhdd = dec(z, zd, pred, last_d=False)
            ldx = torch.mean((xdd - xhdd) ** 2)
            ldz = torch.mean((zdd - pred) ** 2)
        loss = w_rec * torch.mean((x - xh) ** 2) + w_dx * ldx + w_dz * ldz + w_l1 * torch.sum(torch.abs(xim))
        opt.zero_grad()
        loss.backward()
        opt.step()
        return loss.item()

    print("torch", torch.__version__, flush=True)
    print("threads", torch.get_num_threads(), flush=True)
    losses = []
    timed = 0.0
    for e in range(a.warmup + a.epochs):
        if a.max_seconds > 0 and e >= a.warmup + 3 and timed > a.max_seconds:
            break  # a setting this slow is not the reference's best; 3 epochs give its median
        t0 = time.perf_counter()
        order = valid[torch.randperm(len(valid))]
        total = 0.0
        for b0 in range(0, len(order), a.batch):
            f = order[b0:b0 + a.batch]
            total += step(f) * len(f)
        dt_epoch = time.perf_counter() - t0
        losses.append(total / len(order))
        if e >= a.warmup:
            timed += dt_epoch
            print("epoch %.6f" % dt_epoch, flush=True)
    print("loss %.6g %.6g" % (losses[0], losses[-1]))
    print("peak_rss_kb", resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)


if __name__ == "__main__":
    main()
