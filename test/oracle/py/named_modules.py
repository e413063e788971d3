#!/usr/bin/python3
"""Oracle: what PyTorch itself says about the sample models.

Usage:
    /usr/bin/python3 test/oracle/py/named_modules.py [FILE_OR_MODULE ...]

Each argument is a path to a Python file (absolute, or relative to the current
directory or to the repository root) or a dotted module name under samples/
(e.g. ``pollinator_cnn.models``). With no argument, every ``*.py`` under samples/
(except ``__init__.py``) is taken.

For every ``torch.nn.Module`` subclass *defined* in a file (not imported into
it) the script instantiates the class with no arguments, runs ``forward`` once
on a dummy input under ``torch.no_grad()`` in training mode, and reports:

    class        class name
    path         file, relative to the repository root
    line         1-based line of the ``class`` statement
    input_shape  the dummy input's shape
    layers       leaf modules from ``named_modules()`` (modules without children,
                 the root excluded): name, type and the constructor-relevant
                 attributes (``attrs``). ``type`` is the public ``torch.nn`` name
                 (``torch.nn.BatchNorm2d``) when the class is exported by
                 ``torch.nn``; otherwise ``<module>.<qualname>``.
    flow         [[A, B], ...]: B is fed directly by A, observed with hooks.
                 B is fed by A when one of the tensors B receives is the very
                 tensor object A returned from its latest call AND that tensor's
                 ``_version`` counter is unchanged since A returned it (an in-place
                 op in between, e.g. ``out += identity``, breaks the feed; any
                 functional op or view in between creates a new tensor and so
                 breaks it too). When several layers hold the same unchanged
                 tensor (a layer that returns its input, like ``nn.Identity``),
                 the most recent one is the feeder.
    entry        layers fed directly by the model's input tensor
    exit         layers whose output tensor is the model's output
    output_shape shape(s) of the model output
    warnings     warnings raised while constructing or running
    error        present instead of the run data when construction or forward
                 raises: {"stage": "construct"|"forward", "type", "message"}

Input-shape convention: a class attribute ``example_input_shape`` wins; else the
module-level ``EXAMPLE_INPUT_SHAPE`` of the file. The input is
``torch.randn(*shape)`` (float32) after ``torch.manual_seed(0)``.

Import convention: a file inside a package (directories with ``__init__.py``) is
imported by its dotted name with the package root's parent on ``sys.path``; a
file in a plain directory is imported as a top-level module with its own
directory on ``sys.path`` (so ``from model import X`` between sibling scripts
works). Modules loaded from samples/ are dropped from ``sys.modules`` between
files, so equally named files in different sample projects do not collide.

Prints one JSON object on stdout. Source of the facts used: PyTorch docs
``torch.nn.Module.named_modules``, ``register_forward_pre_hook``,
``register_forward_hook``; the ``Tensor._version`` counter is an internal of
autograd's in-place checks (memory: torch/csrc/autograd/variable.h).
"""

import glob
import importlib
import inspect
import json
import os
import sys
import traceback
import warnings

sys.dont_write_bytecode = True  # leave no __pycache__ inside samples/

import torch  # noqa: E402
import torch.nn as nn  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
REPO = os.path.abspath(os.path.join(HERE, "..", "..", ".."))
SAMPLES = os.path.join(REPO, "samples")

ATTRS = (
    "in_channels", "out_channels", "kernel_size", "stride", "padding", "dilation", "groups",
    "in_features", "out_features", "num_features", "num_groups", "num_channels",
    "normalized_shape", "momentum", "eps", "affine", "track_running_stats", "p", "inplace",
    "input_size", "hidden_size", "num_layers", "dropout", "bidirectional", "batch_first",
)


def rel(path):
    return os.path.relpath(os.path.abspath(path), REPO)


def resolve(arg):
    for cand in (arg, os.path.join(REPO, arg)):
        if os.path.isfile(cand):
            return os.path.abspath(cand)
    cand = os.path.join(SAMPLES, *arg.split(".")) + ".py"
    if os.path.isfile(cand):
        return cand
    raise SystemExit(f"named_modules.py: cannot find {arg!r}")


def purge_samples():
    for name, mod in list(sys.modules.items()):
        f = getattr(mod, "__file__", None) or ""
        if f and os.path.abspath(f).startswith(SAMPLES + os.sep):
            del sys.modules[name]


def import_file(path):
    d = os.path.dirname(path)
    parts = [os.path.splitext(os.path.basename(path))[0]]
    while os.path.isfile(os.path.join(d, "__init__.py")):
        parts.insert(0, os.path.basename(d))
        d = os.path.dirname(d)
    purge_samples()
    sys.path.insert(0, d)
    try:
        return importlib.import_module(".".join(parts))
    finally:
        sys.path.remove(d)


def type_name(cls):
    if getattr(nn, cls.__name__, None) is cls:
        return "torch.nn." + cls.__name__
    return f"{cls.__module__}.{cls.__qualname__}"


def jsonable(v):
    if isinstance(v, (bool, int, float, str)) or v is None:
        return v
    if isinstance(v, (tuple, list)):
        return [jsonable(x) for x in v]
    return repr(v)


def layer_attrs(m):
    out = {}
    for a in ATTRS:
        if hasattr(m, a):
            v = getattr(m, a)
            if isinstance(v, torch.Tensor) or callable(v):
                continue
            out[a] = jsonable(v)
    if isinstance(m, (nn.Linear, nn.modules.conv._ConvNd)):
        out["bias"] = m.bias is not None
    return out


def tensors_in(obj):
    if isinstance(obj, torch.Tensor):
        yield obj
    elif isinstance(obj, (tuple, list)):
        for x in obj:
            yield from tensors_in(x)
    elif isinstance(obj, dict):
        for x in obj.values():
            yield from tensors_in(x)


def shape_of(obj):
    if isinstance(obj, torch.Tensor):
        return list(obj.shape)
    if isinstance(obj, (tuple, list)):
        return [shape_of(x) for x in obj]
    return None


def probe_class(cls, module, path):
    rec = {"class": cls.__name__, "path": rel(path), "line": inspect.getsourcelines(cls)[1]}
    shape = getattr(cls, "example_input_shape", None) or getattr(module, "EXAMPLE_INPUT_SHAPE", None)
    caught = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        torch.manual_seed(0)
        try:
            model = cls()
        except Exception as exc:  # noqa: BLE001 - the oracle reports what PyTorch raised
            rec["error"] = {"stage": "construct", "type": type(exc).__name__, "message": str(exc)}
            rec["warnings"] = sorted({str(w.message) for w in caught})
            return rec
        leaves = [(n, m) for n, m in model.named_modules() if n and not any(True for _ in m.children())]
        rec["layers"] = [{"name": n, "type": type_name(type(m)), "attrs": layer_attrs(m)} for n, m in leaves]
        if shape is None:
            rec["error"] = {"stage": "forward", "type": "NoExampleInput",
                            "message": "no example_input_shape / EXAMPLE_INPUT_SHAPE"}
            return rec
        rec["input_shape"] = list(shape)

        last = {}  # producer name -> list of (tensor, version, seq)
        counter = [0]
        edges, entry = [], []
        handles = []

        def feeder(t):
            best = None
            for pname, outs in last.items():
                for (ot, ver, seq) in outs:
                    if ot is t and t._version == ver and (best is None or seq > best[0]):
                        best = (seq, pname)
            return best[1] if best else None

        def remember(name, output):
            counter[0] += 1
            last[name] = [(t, t._version, counter[0]) for t in tensors_in(output)]

        def make_pre(name):
            def pre(mod, inputs):
                for t in tensors_in(inputs):
                    src = feeder(t)
                    if src == "<input>":
                        if name not in entry:
                            entry.append(name)
                    elif src is not None and [src, name] not in edges:
                        edges.append([src, name])
            return pre

        def make_post(name):
            def post(mod, inputs, output):
                remember(name, output)
            return post

        for n, m in leaves:
            handles.append(m.register_forward_pre_hook(make_pre(n)))
            handles.append(m.register_forward_hook(make_post(n)))
        x = torch.randn(*shape)
        remember("<input>", x)
        try:
            model.train()
            with torch.no_grad():
                y = model(x)
        except Exception as exc:  # noqa: BLE001
            rec["error"] = {"stage": "forward", "type": type(exc).__name__, "message": str(exc).strip()}
        else:
            rec["flow"] = edges
            rec["entry"] = entry
            exits = []
            for t in tensors_in(y):
                src = feeder(t)
                if src and src != "<input>" and src not in exits:
                    exits.append(src)
            rec["exit"] = exits
            rec["output_shape"] = shape_of(y)
        finally:
            for h in handles:
                h.remove()
    rec["warnings"] = sorted({str(w.message) for w in caught})
    return rec


def main(argv):
    if argv:
        files = [resolve(a) for a in argv]
    else:
        files = sorted(p for p in glob.glob(os.path.join(SAMPLES, "**", "*.py"), recursive=True)
                       if os.path.basename(p) != "__init__.py")
    result = {"files": [], "classes": []}
    for path in files:
        frec = {"path": rel(path)}
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                module = import_file(path)
        except Exception as exc:  # noqa: BLE001
            frec["error"] = {"stage": "import", "type": type(exc).__name__, "message": str(exc),
                             "trace": traceback.format_exc(limit=3)}
            result["files"].append(frec)
            continue
        frec["module"] = module.__name__
        classes = [c for _, c in inspect.getmembers(module, inspect.isclass)
                   if issubclass(c, nn.Module) and c.__module__ == module.__name__]
        classes.sort(key=lambda c: inspect.getsourcelines(c)[1])
        frec["classes"] = [c.__name__ for c in classes]
        result["files"].append(frec)
        for cls in classes:
            result["classes"].append(probe_class(cls, module, path))
    purge_samples()
    json.dump(result, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main(sys.argv[1:])
