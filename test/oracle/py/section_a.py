#!/usr/bin/python3
"""Oracle for RULES.md section A (model definition): measured facts of PyTorch.

    /usr/bin/python3 test/oracle/py/section_a.py

Prints one JSON object. Every field is a measurement (a difference, a flag, a
message that PyTorch produced); nothing here decides pass or fail. The source
each measurement checks is named beside it, and in the "sources" field.
"""

import json
import math
import sys
import warnings

import torch
import torch.nn as nn
import torch.nn.functional as F

torch.manual_seed(0)
out = {"torch": torch.__version__, "sources": {}}


def maxdiff(a, b):
    return float((a - b).abs().max())


def error_of(fn):
    try:
        fn()
    except Exception as exc:  # noqa: BLE001 - we record what PyTorch raised
        return {"raised": True, "type": type(exc).__name__, "message": str(exc).strip()}
    return {"raised": False, "type": None, "message": None}


# --- bias-before-norm ------------------------------------------------------
# Ioffe & Szegedy 2015 §3.2: a per-channel bias before BN is cancelled by the mean
# subtraction; RULES.md Grounds: LayerNorm over features / GroupNorm with several
# channels per group do not cancel a per-channel bias.
def bias_effect(pre, norm, x):
    pre.train()
    norm.train()
    with torch.no_grad():
        nn.init.normal_(pre.bias, std=1.0)
        with_bias = norm(pre(x))
        pre.bias.zero_()
        without = norm(pre(x))
    return maxdiff(with_bias, without)


x_img = torch.randn(8, 3, 16, 16)
x_vec = torch.randn(8, 16)
out["bias_before_norm"] = {
    "conv_then_batchnorm2d_max_abs_diff": bias_effect(nn.Conv2d(3, 8, 3), nn.BatchNorm2d(8), x_img),
    "conv_then_instancenorm2d_max_abs_diff": bias_effect(nn.Conv2d(3, 8, 3), nn.InstanceNorm2d(8), x_img),
    "conv_then_groupnorm_groups_eq_channels_max_abs_diff": bias_effect(nn.Conv2d(3, 8, 3), nn.GroupNorm(8, 8), x_img),
    "conv_then_groupnorm_2_of_8_max_abs_diff": bias_effect(nn.Conv2d(3, 8, 3), nn.GroupNorm(2, 8), x_img),
    "linear_then_batchnorm1d_max_abs_diff": bias_effect(nn.Linear(16, 16), nn.BatchNorm1d(16), x_vec),
    "linear_then_layernorm_max_abs_diff": bias_effect(nn.Linear(16, 16), nn.LayerNorm(16), x_vec),
}
out["sources"]["bias_before_norm"] = "Ioffe & Szegedy 2015 §3.2; PyTorch docs torch.nn.BatchNorm2d, torch.nn.LayerNorm, torch.nn.GroupNorm"


# --- functional-dropout-always-on / functional-alpha-dropout-never-on --------
# PyTorch docs torch.nn.functional.dropout: training=True by default;
# torch.nn.functional.alpha_dropout: training=False by default.
class FDropNoFlag(nn.Module):
    def forward(self, x):
        return F.dropout(x, p=0.5)


class FDropFlag(nn.Module):
    def forward(self, x):
        return F.dropout(x, p=0.5, training=self.training)


class FAlphaNoFlag(nn.Module):
    def forward(self, x):
        return F.alpha_dropout(x, p=0.5)


class FAlphaFlag(nn.Module):
    def forward(self, x):
        return F.alpha_dropout(x, p=0.5, training=self.training)


xd = torch.randn(64, 32)
m1, m2 = FDropNoFlag().eval(), FDropFlag().eval()
a3, a4 = FAlphaNoFlag().train(), FAlphaFlag().train()
out["functional_dropout"] = {
    "no_training_arg_eval_two_calls_max_abs_diff": maxdiff(m1(xd), m1(xd)),
    "no_training_arg_eval_vs_input_max_abs_diff": maxdiff(m1(xd), xd),
    "training_self_training_eval_two_calls_max_abs_diff": maxdiff(m2(xd), m2(xd)),
    "training_self_training_eval_vs_input_max_abs_diff": maxdiff(m2(xd), xd),
}
out["functional_alpha_dropout"] = {
    "no_training_arg_train_mode_vs_input_max_abs_diff": maxdiff(a3(xd), xd),
    "training_self_training_train_mode_vs_input_max_abs_diff": maxdiff(a4(xd), xd),
}
out["sources"]["functional_dropout"] = "PyTorch docs torch.nn.functional.dropout, torch.nn.functional.alpha_dropout (defaults training=True / training=False)"


# --- drop-rate-range ---------------------------------------------------------
# PyTorch docs torch.nn.Dropout: p outside [0, 1] raises ValueError.
out["drop_rate_range"] = {
    "dropout_1_5": error_of(lambda: nn.Dropout(1.5)),
    "dropout_minus_0_1": error_of(lambda: nn.Dropout(-0.1)),
    "alpha_dropout_5": error_of(lambda: nn.AlphaDropout(5)),
    "dropout_0_9": error_of(lambda: nn.Dropout(0.9)),
}
# kept fraction at p = 0.9 in train mode (a keep probability misread as a drop rate)
with torch.no_grad():
    kept = (nn.Dropout(0.9).train()(torch.ones(100000)) != 0).float().mean()
out["drop_rate_range"]["dropout_0_9_kept_fraction"] = float(kept)
out["sources"]["drop_rate_range"] = "PyTorch docs torch.nn.Dropout; Srivastava et al. 2014 (p = retention probability)"


# --- rnn-dropout-one-layer ---------------------------------------------------
# torch/nn/modules/rnn.py warns when dropout > 0 and num_layers == 1.
def warnings_of(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fn()
    return [f"{w.category.__name__}: {w.message}" for w in caught]


out["rnn_dropout_one_layer"] = {
    "lstm_1_layer_dropout_0_2_warnings": warnings_of(lambda: nn.LSTM(4, 8, num_layers=1, dropout=0.2)),
    "lstm_2_layers_dropout_0_2_warnings": warnings_of(lambda: nn.LSTM(4, 8, num_layers=2, dropout=0.2)),
    "gru_1_layer_dropout_0_3_warnings": warnings_of(lambda: nn.GRU(4, 8, num_layers=1, dropout=0.3)),
}
# one-layer LSTM with dropout: train-mode outputs equal eval-mode outputs (no dropout applied)
with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    lstm1 = nn.LSTM(4, 8, num_layers=1, dropout=0.5, batch_first=True)
xs = torch.randn(3, 5, 4)
with torch.no_grad():
    y_train = lstm1.train()(xs)[0]
    y_eval = lstm1.eval()(xs)[0]
out["rnn_dropout_one_layer"]["lstm_1_layer_train_vs_eval_max_abs_diff"] = maxdiff(y_train, y_eval)
lstm2 = nn.LSTM(4, 8, num_layers=2, dropout=0.5, batch_first=True)
with torch.no_grad():
    y_train2 = lstm2.train()(xs)[0]
    y_eval2 = lstm2.eval()(xs)[0]
out["rnn_dropout_one_layer"]["lstm_2_layers_train_vs_eval_max_abs_diff"] = maxdiff(y_train2, y_eval2)
out["sources"]["rnn_dropout_one_layer"] = "PyTorch docs torch.nn.LSTM (dropout on outputs of each layer except the last); torch/nn/modules/rnn.py"


# --- norm-momentum-convention ----------------------------------------------
# PyTorch docs torch.nn.BatchNorm2d: running = (1 - m) * running + m * batch;
# running_var uses the unbiased batch variance (memory: torch/nn/functional.py batch_norm).
def momentum_error(m):
    bn = nn.BatchNorm2d(5, momentum=m).train()
    old_mean = torch.randn(5)
    old_var = torch.rand(5) + 0.5
    with torch.no_grad():
        bn.running_mean.copy_(old_mean)
        bn.running_var.copy_(old_var)
        xb = torch.randn(6, 5, 4, 4) * 3 + 1
        bn(xb)
    batch_mean = xb.mean(dim=(0, 2, 3))
    batch_var = xb.var(dim=(0, 2, 3), unbiased=True)
    keras_style = m * old_mean + (1 - m) * batch_mean
    return {
        "momentum": m,
        "running_mean_max_error_vs_torch_formula": maxdiff(bn.running_mean, (1 - m) * old_mean + m * batch_mean),
        "running_var_max_error_vs_torch_formula": maxdiff(bn.running_var, (1 - m) * old_var + m * batch_var),
        "running_mean_max_error_vs_keras_formula": maxdiff(bn.running_mean, keras_style),
    }


out["norm_momentum"] = {"m_0_1": momentum_error(0.1), "m_0_99": momentum_error(0.99)}
bn_default = nn.BatchNorm2d(3)
out["norm_momentum"]["defaults"] = {"momentum": bn_default.momentum, "eps": bn_default.eps,
                                    "affine": bn_default.affine, "track_running_stats": bn_default.track_running_stats}
out["sources"]["norm_momentum"] = "PyTorch docs torch.nn.BatchNorm2d (momentum convention, defaults); Keras BatchNormalization docs (moving = m*moving + (1-m)*batch)"


# --- selu-plain-dropout / alpha-dropout-without-selu -------------------------
# Klambauer et al. 2017: SELU with LeCun-normal weights keeps activations near
# mean 0 / variance 1; plain dropout breaks this, alpha dropout keeps it.
def selu_stack_stats(drop_factory, depth=8, width=512, n=4096):
    torch.manual_seed(1)
    layers = []
    for _ in range(depth):
        lin = nn.Linear(width, width)
        nn.init.normal_(lin.weight, std=1.0 / math.sqrt(width))  # LeCun normal
        nn.init.zeros_(lin.bias)
        layers += [lin, nn.SELU()]
        if drop_factory is not None:
            layers.append(drop_factory())
    net = nn.Sequential(*layers).train()
    with torch.no_grad():
        h = net(torch.randn(n, width))
    return {"mean": float(h.mean()), "var": float(h.var())}


out["selu_dropout"] = {
    "depth": 8, "width": 512, "rate": 0.1,
    "no_dropout": selu_stack_stats(None),
    "plain_dropout": selu_stack_stats(lambda: nn.Dropout(0.1)),
    "alpha_dropout": selu_stack_stats(lambda: nn.AlphaDropout(0.1)),
}
out["sources"]["selu_dropout"] = "Klambauer et al. 2017 (SELU, alpha dropout); PyTorch docs torch.nn.SELU, torch.nn.AlphaDropout"

# SELU constants and alpha-dropout affine (RULES.md closed form)
ALPHA = 1.6732632423543772848170429916717
LAMBDA = 1.0507009873554804934193349852946
alpha_p = -LAMBDA * ALPHA
sel = nn.SELU()
out["selu_constants"] = {
    "alpha": ALPHA, "lambda": LAMBDA,
    "torch_selu_of_minus_inf_limit": float(sel(torch.tensor(-1e4))),  # -> -lambda*alpha
    "torch_selu_slope_positive": float(sel(torch.tensor(2.0)) / 2.0),  # -> lambda
}


def alpha_affine_closed_form(rate):
    q = 1.0 - rate
    a = (q + alpha_p ** 2 * q * (1 - q)) ** -0.5
    b = -a * (1 - q) * alpha_p
    return a, b


def alpha_affine_measured(rate):
    # AlphaDropout in train mode: kept x -> a*x + b, dropped -> a*alpha' + b.
    d = nn.AlphaDropout(rate).train()
    torch.manual_seed(3)
    with torch.no_grad():
        zeros = d(torch.zeros(200000))
        torch.manual_seed(3)
        ones = d(torch.ones(200000))
    kept = ones != zeros  # same mask (same seed): kept positions differ between 0 and 1 inputs
    b = float(zeros[kept].mean())
    a = float((ones[kept] - zeros[kept]).mean())
    dropped_value = float(zeros[~kept].mean())
    return a, b, dropped_value, float(kept.float().mean())


out["alpha_dropout_affine"] = {}
for rate in (0.05, 0.1):
    a, b = alpha_affine_closed_form(rate)
    ma, mb, dv, kf = alpha_affine_measured(rate)
    out["alpha_dropout_affine"][f"rate_{rate}"] = {
        "closed_form_a": a, "closed_form_b": b,
        "torch_measured_a": ma, "torch_measured_b": mb,
        "torch_dropped_value": dv, "closed_form_dropped_value": a * alpha_p + b,
        "kept_fraction": kf,
    }
out["sources"]["alpha_dropout_affine"] = "Klambauer et al. 2017 (alpha-dropout affine a, b closed form); RULES.md Grounds (values 0.95484/0.08394, 0.92128/0.16197)"


# --- groupnorm-divisibility / norm-channel-mismatch / tiny batch -------------
out["groupnorm_3_16"] = {
    "construct": error_of(lambda: nn.GroupNorm(3, 16)),
}
out["groupnorm_4_16"] = {"construct": error_of(lambda: nn.GroupNorm(4, 16))}
out["sources"]["groupnorm"] = "PyTorch docs torch.nn.GroupNorm (num_channels must be divisible by num_groups); Wu & He 2018"

conv16 = nn.Conv2d(3, 16, 3, padding=1)
out["norm_channel_mismatch"] = {
    "bn2d_32_after_conv_16_construct": error_of(lambda: nn.Sequential(conv16, nn.BatchNorm2d(32))),
    "bn2d_32_after_conv_16_forward": error_of(lambda: nn.Sequential(conv16, nn.BatchNorm2d(32))(torch.randn(2, 3, 8, 8))),
    "bn2d_16_after_conv_16_forward": error_of(lambda: nn.Sequential(conv16, nn.BatchNorm2d(16))(torch.randn(2, 3, 8, 8))),
    "bn2d_after_linear_forward": error_of(lambda: nn.Sequential(nn.Linear(8, 4), nn.BatchNorm2d(4))(torch.randn(2, 8))),
    "bn1d_after_conv2d_forward": error_of(lambda: nn.Sequential(conv16, nn.BatchNorm1d(16))(torch.randn(2, 3, 8, 8))),
    "groupnorm_8_32_after_conv_16_forward": error_of(lambda: nn.Sequential(conv16, nn.GroupNorm(8, 32))(torch.randn(2, 3, 8, 8))),
}
out["sources"]["norm_channel_mismatch"] = "PyTorch docs torch.nn.BatchNorm1d/2d (input shapes), torch.nn.GroupNorm"

out["batchnorm_batch_of_one"] = {
    "bn1d_train_batch_1": error_of(lambda: nn.BatchNorm1d(4).train()(torch.randn(1, 4))),
    "bn1d_train_batch_2": error_of(lambda: nn.BatchNorm1d(4).train()(torch.randn(2, 4))),
    "bn1d_eval_batch_1": error_of(lambda: nn.BatchNorm1d(4).eval()(torch.randn(1, 4))),
    "bn2d_train_batch_1_spatial_1x1": error_of(lambda: nn.BatchNorm2d(4).train()(torch.randn(1, 4, 1, 1))),
    "bn2d_train_batch_1_spatial_4x4": error_of(lambda: nn.BatchNorm2d(4).train()(torch.randn(1, 4, 4, 4))),
}
out["sources"]["batchnorm_batch_of_one"] = "torch/nn/functional.py _verify_batch_size (memory: message 'Expected more than 1 value per channel when training')"


# --- hand-rolled-dropout -----------------------------------------------------
# PyTorch docs torch.nn.Dropout: kept values are scaled by 1/(1-p) so the expected
# activation is unchanged; a mask without the rescale shrinks it by (1-p).
p = 0.3
xh = torch.ones(200000)
torch.manual_seed(5)
mask = (torch.rand_like(xh) > p).float()
out["hand_rolled_dropout"] = {
    "p": p,
    "mean_without_rescale": float((xh * mask).mean()),
    "mean_with_rescale": float((xh * mask / (1 - p)).mean()),
    "mean_nn_dropout": float(nn.Dropout(p).train()(xh).mean()),
}
out["sources"]["hand_rolled_dropout"] = "PyTorch docs torch.nn.Dropout (scaling by 1/(1-p)); Srivastava et al. 2014"


# --- dropout-feeds-batchnorm (variance shift) --------------------------------
# Li et al. 2019: the variance BN sees through dropout in training differs from
# the variance at inference. Measured: running_var learned after dropout vs the
# variance of the same activations without dropout (what eval feeds).
torch.manual_seed(6)
bn_after_drop = nn.BatchNorm1d(64, momentum=None).train()
drop = nn.Dropout(0.5).train()
with torch.no_grad():
    for _ in range(50):
        bn_after_drop(drop(torch.randn(256, 64)))
    eval_var = torch.randn(20000, 64).var(dim=0).mean()
out["dropout_feeds_batchnorm"] = {
    "running_var_mean_learned_through_dropout": float(bn_after_drop.running_var.mean()),
    "activation_var_at_inference": float(eval_var),
}
out["sources"]["dropout_feeds_batchnorm"] = "Li, Chen, Hu, Yang 2019 (variance shift)"

# --- alpha-dropout-without-selu ---------------------------------------------
# Klambauer et al. 2017: alpha dropout's affine (a, b) is fitted to SELU's fixed
# point (mean 0, variance 1) and sets dropped units to SELU's negative saturation
# -lambda*alpha. On ReLU outputs (non-negative, mean ~0.4) it changes the mean by
# the keep factor a*q and makes negative values ReLU never produces; plain dropout
# keeps the mean (PyTorch docs torch.nn.Dropout).
torch.manual_seed(7)
relu_h = torch.relu(torch.randn(400000))
with torch.no_grad():
    after_alpha = nn.AlphaDropout(0.1).train()(relu_h)
    after_plain = nn.Dropout(0.1).train()(relu_h)
out["alpha_dropout_on_relu"] = {
    "rate": 0.1,
    "relu_mean": float(relu_h.mean()),
    "alpha_dropout_mean": float(after_alpha.mean()),
    "plain_dropout_mean": float(after_plain.mean()),
    "relu_negative_fraction": float((relu_h < 0).float().mean()),
    "alpha_dropout_negative_fraction": float((after_alpha < 0).float().mean()),
}
out["sources"]["alpha_dropout_on_relu"] = "Klambauer et al. 2017 (alpha dropout targets the SELU fixed point); PyTorch docs torch.nn.AlphaDropout, torch.nn.Dropout"


# --- selu-init ----------------------------------------------------------------
# PyTorch docs torch.nn.SELU: with kaiming_normal_ use nonlinearity='linear' for
# self-normalising networks; Klambauer et al. 2017 assume LeCun-normal weights
# (variance 1/fan_in). Measured: activation variance after a deep SELU stack.
def selu_init_stats(nonlinearity, depth=16, width=256, n=4096):
    torch.manual_seed(8)
    layers = []
    for _ in range(depth):
        lin = nn.Linear(width, width)
        nn.init.kaiming_normal_(lin.weight, nonlinearity=nonlinearity)
        nn.init.zeros_(lin.bias)
        layers += [lin, nn.SELU()]
    with torch.no_grad():
        h = nn.Sequential(*layers)(torch.randn(n, width))
    return {"mean": float(h.mean()), "var": float(h.var())}


out["selu_init"] = {
    "depth": 16, "width": 256,
    "kaiming_linear": selu_init_stats("linear"),
    "kaiming_relu": selu_init_stats("relu"),
    "kaiming_selu": selu_init_stats("selu"),
    "gain_linear": nn.init.calculate_gain("linear"),
    "gain_relu": nn.init.calculate_gain("relu"),
    "gain_selu": nn.init.calculate_gain("selu"),
}
out["sources"]["selu_init"] = "PyTorch docs torch.nn.SELU (kaiming_normal_ with nonlinearity='linear'), torch.nn.init.calculate_gain; Klambauer et al. 2017 (LeCun normal)"


# --- selu-with-batchnorm --------------------------------------------------------
# Ioffe & Szegedy 2015: in training a BN output depends on the other examples of
# the mini-batch; a SELU stack alone does not. Measured: the same example in two
# different batches, training mode.
def batch_dependence(with_bn):
    torch.manual_seed(9)
    layers = [nn.Linear(16, 32)]
    if with_bn:
        layers.append(nn.BatchNorm1d(32))
    layers += [nn.SELU(), nn.Linear(32, 4)]
    net = nn.Sequential(*layers).train()
    x0 = torch.randn(1, 16)
    with torch.no_grad():
        a = net(torch.cat([x0, torch.randn(7, 16)]))[0]
        b = net(torch.cat([x0, torch.randn(7, 16) * 3 + 1]))[0]
    return maxdiff(a, b)


out["selu_with_batchnorm"] = {
    "selu_stack_same_example_two_batches_max_abs_diff": batch_dependence(False),
    "selu_bn_stack_same_example_two_batches_max_abs_diff": batch_dependence(True),
}
out["sources"]["selu_with_batchnorm"] = "Ioffe & Szegedy 2015 (BN output depends on the mini-batch in training); Klambauer et al. 2017"


# --- hand-rolled-dropout: gating ------------------------------------------------
# PyTorch docs torch.nn.Module.eval: eval() only flips self.training; a mask that
# does not read it keeps dropping. nn.Dropout is the identity in eval mode.
class UngatedMask(nn.Module):
    def forward(self, x):
        return x * (torch.rand_like(x) > 0.3).float() / 0.7


class GatedMask(nn.Module):
    def forward(self, x):
        if not self.training:
            return x
        return x * (torch.rand_like(x) > 0.3).float() / 0.7


xg = torch.randn(64, 32)
ug, gg = UngatedMask().eval(), GatedMask().eval()
out["hand_rolled_dropout"]["ungated_eval_two_calls_max_abs_diff"] = maxdiff(ug(xg), ug(xg))
out["hand_rolled_dropout"]["gated_eval_vs_input_max_abs_diff"] = maxdiff(gg(xg), xg)
out["hand_rolled_dropout"]["nn_dropout_eval_vs_input_max_abs_diff"] = maxdiff(nn.Dropout(0.3).eval()(xg), xg)

json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
