#!/usr/bin/python3
"""Oracle: a model before and after a Regwise fix, measured by PyTorch itself.

    /usr/bin/python3 test/oracle/py/fixed_model.py ORIGINAL.py FIXED.py CLASS D0,D1,...

Both files define CLASS (an nn.Module buildable without arguments). For each the
script reports whether construction and forward raise, the parameter count, and
whether two forward calls in eval mode agree; then, with the original's weights
loaded into the fixed model (strict=False, so a removed bias is simply absent),
the largest difference between their training-mode outputs on the same input and
the same random seed. Prints one JSON object; it decides nothing.

Sources of the facts used: PyTorch docs torch.nn.Module.load_state_dict (strict),
torch.nn.Module.eval / train.
"""

import importlib.util
import json
import sys
import warnings

sys.dont_write_bytecode = True

import torch  # noqa: E402


def load(path, name):
    spec = importlib.util.spec_from_file_location(name, path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def err(exc):
    return {"type": type(exc).__name__, "message": str(exc).strip()}


def measure(path, name, cls_name, shape):
    rec = {"construct_error": None, "forward_error": None}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            torch.manual_seed(0)
            model = getattr(load(path, name), cls_name)()
        except Exception as exc:  # noqa: BLE001 - the oracle reports what PyTorch raised
            rec["construct_error"] = err(exc)
            rec["warnings"] = [str(w.message) for w in caught]
            return rec, None
    rec["warnings"] = [str(w.message) for w in caught]
    rec["param_count"] = sum(p.numel() for p in model.parameters())
    x = torch.randn(*shape, generator=torch.Generator().manual_seed(1))
    try:
        with torch.no_grad():
            model.eval()
            a, b = model(x), model(x)
            rec["eval_two_calls_max_abs_diff"] = float((a - b).abs().max())
            model.train()
            torch.manual_seed(2)
            t1 = model(x)
            torch.manual_seed(3)
            t2 = model(x)
            rec["train_two_calls_max_abs_diff"] = float((t1 - t2).abs().max())
    except Exception as exc:  # noqa: BLE001
        rec["forward_error"] = err(exc)
        return rec, None
    return rec, (model, x)


def main(argv):
    original, fixed, cls_name, shape_s = argv
    shape = [int(s) for s in shape_s.split(",")]
    out = {"class": cls_name, "input_shape": shape}
    out["original"], orig = measure(original, "regwise_original", cls_name, shape)
    out["fixed"], fix = measure(fixed, "regwise_fixed", cls_name, shape)
    if orig and fix:
        model_o, x = orig
        model_f, _ = fix
        res = model_f.load_state_dict(model_o.state_dict(), strict=False)
        out["transfer"] = {"missing_keys": list(res.missing_keys), "unexpected_keys": list(res.unexpected_keys)}
        model_o.train()
        model_f.train()
        with torch.no_grad():
            torch.manual_seed(4)
            yo = model_o(x)
            torch.manual_seed(4)
            yf = model_f(x)
        out["train_output_original_vs_fixed_max_abs_diff"] = float((yo - yf).abs().max())
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main(sys.argv[1:])
