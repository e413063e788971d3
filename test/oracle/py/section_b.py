#!/usr/bin/python3
"""Oracle for RULES.md section B (training and evaluation): measured facts of PyTorch.

    /usr/bin/python3 test/oracle/py/section_b.py

Prints one JSON object of measurements; no pass/fail decision is made here.
"""

import json
import sys

import torch
import torch.nn as nn
import torch.nn.functional as F

torch.manual_seed(0)
out = {"torch": torch.__version__, "sources": {}}


def maxdiff(a, b):
    return float((a - b).abs().max())


def small_net():
    torch.manual_seed(0)
    return nn.Sequential(
        nn.Linear(8, 32, bias=False), nn.BatchNorm1d(32), nn.ReLU(),
        nn.Dropout(0.5), nn.Linear(32, 3),
    )


# --- eval-mode-missing -------------------------------------------------------
# PyTorch autograd notes "Locally disabling gradient computation": no_grad does
# not change module mode; dropout and BN behave per .training.
x = torch.randn(16, 8)
net = small_net()
bn = net[1]
with torch.no_grad():
    rm0 = bn.running_mean.clone()
    y1 = net(x)
    y2 = net(x)
    moved = maxdiff(bn.running_mean, rm0)
out["no_grad_without_eval"] = {
    "module_training": net.training,
    "two_passes_max_abs_diff": maxdiff(y1, y2),
    "bn_running_mean_max_abs_change": moved,
    "bn_num_batches_tracked": int(bn.num_batches_tracked),
}
net.eval()
with torch.no_grad():
    rm1 = bn.running_mean.clone()
    y3 = net(x)
    y4 = net(x)
out["no_grad_after_eval"] = {
    "module_training": net.training,
    "two_passes_max_abs_diff": maxdiff(y3, y4),
    "bn_running_mean_max_abs_change": maxdiff(bn.running_mean, rm1),
}
# inference_mode behaves the same way (mode untouched)
net.train()
with torch.inference_mode():
    out["inference_mode_without_eval"] = {"two_passes_max_abs_diff": maxdiff(net(x), net(x))}
out["sources"]["eval_mode"] = "PyTorch autograd notes, 'Locally disabling gradient computation' (eval() is orthogonal to no_grad/inference_mode); PyTorch docs torch.nn.Module.eval"


# --- train-mode-not-restored / mode-switch-not-called ------------------------
def run_epochs(restore, bare_statement=False, epochs=3, steps=2):
    model = small_net()
    opt = torch.optim.SGD(model.parameters(), lr=0.01)
    seen = []  # (epoch, phase, model.training) at each forward
    state = {"epoch": 0, "phase": "train"}
    model.register_forward_pre_hook(lambda m, inp: seen.append((state["epoch"], state["phase"], m.training)))

    def validate(m):
        if bare_statement:
            m.eval  # the statement form: attribute access, no call
        else:
            m.eval()
        state["phase"] = "val"
        with torch.no_grad():
            m(torch.randn(4, 8))
        state["phase"] = "train"

    model.train()
    for epoch in range(epochs):
        state["epoch"] = epoch
        if restore:
            model.train()
        for _ in range(steps):
            opt.zero_grad()
            F.cross_entropy(model(torch.randn(4, 8)), torch.randint(0, 3, (4,))).backward()
            opt.step()
        validate(model)
    train_modes = {e: [t for (ep, ph, t) in seen if ep == e and ph == "train"] for e in range(epochs)}
    val_modes = [t for (_, ph, t) in seen if ph == "val"]
    return train_modes, val_modes


tm, vm = run_epochs(restore=False)
tm2, vm2 = run_epochs(restore=True)
tm3, vm3 = run_epochs(restore=True, bare_statement=True)
out["train_mode_not_restored"] = {
    "without_train_call": {
        "training_during_epoch_1_forward": tm[0],
        "training_during_epoch_2_forward": tm[1],
        "training_during_validation": vm,
    },
    "with_train_call_at_loop_head": {
        "training_during_epoch_1_forward": tm2[0],
        "training_during_epoch_2_forward": tm2[1],
        "training_during_validation": vm2,
    },
}
out["mode_switch_not_called"] = {
    "bare_model_eval_statement_training_during_validation": vm3,
}
out["sources"]["modes"] = "PyTorch docs torch.nn.Module.train / torch.nn.Module.eval (set self.training recursively)"


# --- frozen-norm-still-updating ----------------------------------------------
# requires_grad=False stops gradients, not BN running statistics (PyTorch docs
# torch.nn.BatchNorm2d: stats are updated whenever training=True and
# track_running_stats=True).
def frozen_bn_change(put_in_eval):
    model = small_net()
    model[:2].requires_grad_(False)
    model.train()
    if put_in_eval:
        model[1].eval()
    before = model[1].running_mean.clone()
    opt = torch.optim.SGD([p for p in model.parameters() if p.requires_grad], lr=0.01)
    for _ in range(3):
        opt.zero_grad()
        F.cross_entropy(model(torch.randn(8, 8) + 2.0), torch.randint(0, 3, (8,))).backward()
        opt.step()
    return maxdiff(model[1].running_mean, before), bool(model[1].weight.requires_grad)


d_train, rg = frozen_bn_change(False)
d_eval, _ = frozen_bn_change(True)
out["frozen_norm"] = {
    "bn_weight_requires_grad": rg,
    "running_mean_change_bn_left_in_train": d_train,
    "running_mean_change_bn_put_in_eval": d_eval,
}
out["sources"]["frozen_norm"] = "PyTorch docs torch.nn.BatchNorm2d (track_running_stats; running stats update in training mode)"


# --- batchnorm-tiny-batch ----------------------------------------------------
# With batch statistics, one sample's output depends on the other samples of its
# batch; the smaller the batch, the larger that dependence. GroupNorm is per sample.
# Wu & He 2018 for the accuracy consequence (not reproduced here).
def partner_dependence(norm, batch):
    torch.manual_seed(2)
    norm.train()
    xa = torch.randn(batch, 8, 6, 6)
    xb = xa.clone()
    xb[1:] = torch.randn(batch - 1, 8, 6, 6)  # same sample 0, different partners
    with torch.no_grad():
        return maxdiff(norm(xa)[0], norm(xb)[0])


def bn_raises(norm, shape, train=True):
    norm.train(train)
    try:
        norm(torch.randn(*shape))
        return None
    except ValueError as err:
        return str(err)


out["batch_of_one"] = {
    "bn1d_train_batch_1": bn_raises(nn.BatchNorm1d(8), (1, 8)),
    "bn1d_train_batch_2": bn_raises(nn.BatchNorm1d(8), (2, 8)),
    "bn1d_eval_batch_1": bn_raises(nn.BatchNorm1d(8), (1, 8), train=False),
    "bn2d_train_batch_1_spatial_4x4": bn_raises(nn.BatchNorm2d(8), (1, 8, 4, 4)),
    "bn2d_train_batch_1_spatial_1x1": bn_raises(nn.BatchNorm2d(8), (1, 8, 1, 1)),
}
out["sources"]["batch_of_one"] = "torch/nn/functional.py batch_norm (_verify_batch_size): 'Expected more than 1 value per channel when training'"

out["tiny_batch"] = {
    "bn2d_sample0_change_when_partners_change_batch_2": partner_dependence(nn.BatchNorm2d(8), 2),
    "bn2d_sample0_change_when_partners_change_batch_32": partner_dependence(nn.BatchNorm2d(8), 32),
    "groupnorm_sample0_change_when_partners_change_batch_2": partner_dependence(nn.GroupNorm(4, 8), 2),
}
out["sources"]["tiny_batch"] = "Ioffe & Szegedy 2015 (batch statistics); Wu & He 2018 (GN independent of batch size)"


# --- adam-coupled-weight-decay -----------------------------------------------
# Loshchilov & Hutter 2019; PyTorch docs torch.optim.Adam (weight_decay adds
# lambda*theta to the gradient) and torch.optim.AdamW (theta *= 1 - lr*lambda).
def one_step(opt_cls, wd, grad_fn=None, lr=1e-3, pre_decay=0.0):
    torch.manual_seed(4)
    p = nn.Parameter(torch.randn(1000) * 3)
    g = torch.randn(1000) * 1e-3
    with torch.no_grad():
        p.mul_(1.0 - pre_decay)
    opt = opt_cls([p], lr=lr, weight_decay=wd)
    p.grad = g.clone() if grad_fn is None else grad_fn(p.detach(), g)
    opt.step()
    return p.detach().clone()


adam = one_step(torch.optim.Adam, 0.1)
adamw = one_step(torch.optim.AdamW, 0.1)
adam_l2_by_hand = one_step(torch.optim.Adam, 0.0, grad_fn=lambda p, g: g + 0.1 * p)
adamw_by_hand = one_step(torch.optim.Adam, 0.0, pre_decay=1e-3 * 0.1)
torch.manual_seed(4)
p0 = torch.randn(1000) * 3
out["adam_vs_adamw"] = {
    "lr": 1e-3, "weight_decay": 0.1,
    "adam_vs_adamw_max_abs_diff": maxdiff(adam, adamw),
    "adam_vs_adam_with_l2_added_to_grad_max_abs_diff": maxdiff(adam, adam_l2_by_hand),
    "adamw_vs_decay_then_adam_max_abs_diff": maxdiff(adamw, adamw_by_hand),
    # first Adam step moves every coordinate by ~lr regardless of decay: the L2 term is normalised away
    "adam_step_size_max": float((adam - p0).abs().max()),
    "adamw_step_size_max": float((adamw - p0).abs().max()),
    "adamw_default_weight_decay": torch.optim.AdamW([nn.Parameter(torch.zeros(1))]).defaults["weight_decay"],
    "adam_default_weight_decay": torch.optim.Adam([nn.Parameter(torch.zeros(1))]).defaults["weight_decay"],
}
out["sources"]["adam_vs_adamw"] = "Loshchilov & Hutter 2019; PyTorch docs torch.optim.Adam, torch.optim.AdamW"

json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
