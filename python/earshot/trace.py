"""A researcher's own nn.Module, as written -> an Effect the exporter writes.

The module's forward is traced with torch.fx (symbolic tracing, torch's own
layers kept whole) and shape-propagated twice, with two batch sizes and two
lengths: an axis whose size follows the batch is the batch axis, one that
follows the length is time, any other is channels. Layout changes
(permute, transpose, unsqueeze, squeeze, expand, view) then need no
bookkeeping: every layer's input is checked against the layout it needs.

The traced graph must be one chain from the network's input vector to one
output channel, which is what an effect file holds (dsp/FORMAT.md):

  inputs     the audio, and controls given as [B, n], [B, T, n] or one per
             argument ([B], [B, 1], [B, T]), concatenated on the channel axis
             (broadcast over time first when they are [B, n]);
  layers     nn.Linear, nn.Conv1d (causal: zero padding on the left by
             F.pad / nn.ConstantPad1d, or padding=(kernel-1)*dilation with the
             excess trimmed on the right), nn.LSTM / nn.GRU (batch-first or
             not, no initial state; output [0] of the tuple), activations as
             modules or functions (tanh, sigmoid, relu, leaky_relu, softsign,
             hardtanh), gated units written as chunk(2) on channels and
             tanh(a) * sigmoid(b), and earshot's own layer modules;
  output     one channel, optionally plus the input audio (the residual
             add of the input becomes input_skip).

Anything else is refused with an ExportError naming the traced operation,
the source line it came from and what the format supports; nothing is
written. Layer names are the module's attribute paths (`body.rnn`); a layer
written as a function is named after its traced node.
"""

import operator
import re

import torch
import torch.fx as fx
import torch.nn as nn
import torch.nn.functional as F
from torch.fx.passes.shape_prop import ShapeProp

from .layer_types import ExportError, type_of_module
from .modules import CausalConv1d, Effect, FiLM, Gated, TCNBlock, WaveNet, control_spec

# (batch, time) of the two shape propagations: the axes that change between
# them are batch and time; both are primes no layer width is likely to equal,
# and the roles never depend on that (a width is constant across the runs).
_SIZES = ((2, 97), (3, 89))

_SUPPORTED = ("the format maps: Linear, Conv1d (causal), LSTM, GRU, activations (tanh, sigmoid, relu, "
              "leaky_relu, softsign, hardtanh), gated units (chunk + tanh * sigmoid), concatenation of audio "
              "and controls on the channel axis, the residual add of the input, and layout changes")

_LAYOUT_METHODS = {"permute", "transpose", "unsqueeze", "squeeze", "contiguous", "expand", "expand_as", "repeat",
                   "view", "reshape", "float", "flatten", "t"}
_LAYOUT_FUNCTIONS = {torch.permute, torch.transpose, torch.unsqueeze, torch.squeeze, torch.reshape,
                     torch.flatten}
_FUNCTIONAL_ACTS = {torch.tanh: "tanh", torch.sigmoid: "sigmoid", torch.relu: "relu", F.relu: "relu",
                    F.leaky_relu: "leaky_relu", F.softsign: "softsign", F.hardtanh: "hardtanh",
                    torch.nn.functional.tanh: "tanh", torch.nn.functional.sigmoid: "sigmoid"}
_METHOD_ACTS = {"tanh": "tanh", "sigmoid": "sigmoid", "relu": "relu"}
_MODULE_ACTS = (nn.Tanh, nn.Sigmoid, nn.ReLU, nn.LeakyReLU, nn.Softsign, nn.Hardtanh)
_PASS_MODULES = (nn.Identity, nn.Dropout)
_EARSHOT_LAYERS = (Gated, FiLM, WaveNet, TCNBlock)


class _SizedProxy(fx.Proxy):
    """A traced value of known length: unpacking it gives its items."""

    def __init__(self, node, tracer, n):
        super().__init__(node, tracer)
        self._n = n

    def __iter__(self):
        return iter([self[i] for i in range(self._n)])


class _Tracer(fx.Tracer):
    """torch's layers and earshot's layer modules stay whole; everything else is traced through."""

    def __init__(self):
        super().__init__()
        self.record_stack_traces = True

    def create_proxy(self, kind, target, args, kwargs, *rest, **kw):
        # torch 1.13 unpacks a traced tuple by reading the caller's bytecode,
        # which fails on Python 3.11; the values unpacked in forwards (a
        # recurrent layer's (output, state), chunk's parts) know their length.
        p = super().create_proxy(kind, target, args, kwargs, *rest, **kw)
        n = None
        if kind == "call_module" and isinstance(self.root.get_submodule(target), nn.RNNBase):
            n = 2
        elif (kind == "call_method" and target == "chunk") or (kind == "call_function" and target is torch.chunk):
            n = args[1] if len(args) > 1 else kwargs.get("chunks")
        return _SizedProxy(p.node, self, n) if isinstance(n, int) else p

    def is_leaf_module(self, m, qualname):
        if isinstance(m, nn.Sequential):
            return False
        if isinstance(m, (nn.RNNBase, nn.Linear, nn.Conv1d, nn.ConstantPad1d) + _MODULE_ACTS + _PASS_MODULES +
                      _EARSHOT_LAYERS) or type_of_module(m) is not None:
            return True
        return super().is_leaf_module(m, qualname)


# ---- values of the traced graph ----------------------------------------------------------------

class _Chain:
    """The signal: the network's input channels (`names`) through `layers` so far."""

    def __init__(self, names, layers=(), pad_left=0, excess_right=0, stack=None):
        self.names, self.layers = list(names), list(layers)
        self.pad_left, self.excess_right = pad_left, excess_right
        self.stack = stack  # a _Stack state the layers follow, or None (they follow the inputs)

    def then(self, name, module, **kw):
        return _Chain(self.names, self.layers + [(name, module)], stack=self.stack, **kw)

    def padded(self, left):
        return _Chain(self.names, self.layers, self.pad_left + left, self.excess_right, self.stack)

    def trimmed(self):
        return _Chain(self.names, self.layers, self.pad_left, 0, self.stack)

    @property
    def is_input(self):
        return not self.layers and self.stack is None

    @property
    def is_audio(self):
        return not self.layers and self.names == ["audio"]


class _Stack:
    """A gated residual stack's state h_l (van den Oord et al. 2016): h_0, the
    1x1 input convolution's output (`first`), and each level so far,
    h_{l+1} = h_l + res_l(tanh * sigmoid of conv_l(h_l))."""

    def __init__(self, first, levels):
        self.first, self.levels = first, list(levels)  # levels: (conv name, conv, res name, res)


class _SkipSum:
    """A sum of skip terms skip_l(g_l) of one stack: the stack's output."""

    def __init__(self, terms):
        self.terms = list(terms)  # (depth, conv name, conv, skip name, skip, state)


class _CtlLinear:
    """nn.Linear applied to the controls [B, n]: one FiLM coefficient vector (gamma or beta)."""

    def __init__(self, names, name, linear):
        self.names, self.name, self.linear = names, name, linear


class _Scaled:
    """chain * gamma, waiting for + beta."""

    def __init__(self, chain, gamma):
        self.chain, self.gamma = chain, gamma


class _Controls:
    """Control values not yet on the time axis ([B, n], [B], [B, 1])."""

    def __init__(self, names):
        self.names = list(names)


class _RecurrentOut:
    def __init__(self, chain):
        self.chain = chain


class _Chunks:
    def __init__(self, chain):
        self.chain = chain


class _Half:
    """One half of a chunk(2) on channels, possibly through tanh or sigmoid."""

    def __init__(self, chain, index, fn=None):
        self.chain, self.index, self.fn = chain, index, fn


class _Final:
    def __init__(self, chain, skip):
        self.chain, self.skip = chain, skip


class _Opaque:
    """Shapes, sizes and numbers: arguments of layout changes, never signal."""


# ---- the trace ---------------------------------------------------------------------------------

_HERE = __import__("os").path.dirname(__import__("os").path.abspath(__file__))
_TORCH = __import__("os").path.dirname(__import__("os").path.abspath(torch.__file__))


def _source(node):
    """'file:line: code' of the line a node was traced from, or ''."""
    st = getattr(node, "stack_trace", None) or ""
    frames = [f for f in re.findall(r'File "([^"]+)", line (\d+), in [\w<>]+\n\s*(.*)', st)
              if not f[0].startswith((_HERE, _TORCH, "<"))]
    if not frames:
        return ""
    f, line, code = frames[0]  # torch lists the innermost frame first
    return f"{f}:{line}: {code.strip()}"


def _op_text(node, gm):
    if node.op == "call_module":
        return f"{node.target} ({type(gm.get_submodule(node.target)).__name__})"
    if node.op == "call_function":
        return getattr(node.target, "__name__", str(node.target))
    if node.op == "call_method":
        return f".{node.target}()"
    return f"{node.op} {node.target}"


class _Refusal(Exception):
    pass


def _refuse(reason):
    raise _Refusal(reason)


def _roles(meta_a, meta_b):
    """Per axis 'B', 'T' or 'C' from the two propagations' shapes."""
    (b1, t1), (b2, t2) = _SIZES
    roles = []
    for s1, s2 in zip(meta_a, meta_b):
        if s1 == b1 and s2 == b2:
            roles.append("B")
        elif s1 - t1 == s2 - t2:
            roles.append("T")  # time, or time plus padding
        elif s1 == s2:
            roles.append("C")
        else:
            roles.append("?")
    return roles


def _channels(shape, roles):
    n = 1
    for s, r in zip(shape, roles):
        if r == "C":
            n *= s
    return n


def _example_inputs(model, n_args, n_controls, sizes):
    """Example inputs of one calling convention that the model runs with, and the convention."""
    b, t = sizes
    audio_forms = {"[B, T]": (b, t), "[B, T, 1]": (b, t, 1), "[B, 1, T]": (b, 1, t)}
    n_ctl_args = n_args - 1
    if n_ctl_args == 0:
        ctl_forms = [("none", [])]
    elif n_ctl_args == 1:
        n = n_controls if n_controls else 1
        ctl_forms = [(f"[B, {n}]", [(b, n)]), (f"[B, T, {n}]", [(b, t, n)]), ("[B, T]", [(b, t)])]
    else:
        k = n_ctl_args
        ctl_forms = [("[B, 1] each", [(b, 1)] * k), ("[B] each", [(b,)] * k), ("[B, T] each", [(b, t)] * k)]
    g = torch.Generator().manual_seed(0)
    tried, runs = [], None
    for aname, ashape in audio_forms.items():
        for cname, cshapes in ctl_forms:
            args = [torch.rand(ashape, generator=g) * 0.2 - 0.1] + [torch.rand(s, generator=g) for s in cshapes]
            try:
                with torch.no_grad():
                    y = model(*args)
            except Exception as e:  # noqa: BLE001 - each convention is a guess; the list says what failed
                tried.append(f"audio {aname}, controls {cname}: {type(e).__name__}: {str(e).splitlines()[0][:120]}")
                continue
            if isinstance(y, torch.Tensor) and y.numel() == b * t:
                return args, (aname, cname)
            if runs is None and isinstance(y, torch.Tensor):
                runs = args, (aname, cname)  # runs but changes the length: the walk names the layer at fault
            tried.append(f"audio {aname}, controls {cname}: returned "
                         f"{list(y.shape) if isinstance(y, torch.Tensor) else type(y).__name__}, not one value per sample")
    if runs is not None:
        return runs
    raise ExportError("the model could not be called with any calling convention tried:\n  " + "\n  ".join(tried))


def trace(model, controls=None):
    """(Effect holding the model's own layers, convention text) for `model` as written."""
    if not isinstance(model, nn.Module):
        raise ExportError(f"export needs a torch.nn.Module, got {type(model).__name__}")
    modes = {m: m.training for m in model.modules()}
    model.eval()  # inference behaviour (dropout off) while tracing; the modes are restored after
    try:
        return _trace(model, controls, modes)
    finally:
        for m, training in modes.items():
            m.training = training


def _trace(model, controls, modes):
    specs = [control_spec(c) for c in (controls or [])]
    tracer = _Tracer()
    try:
        graph = tracer.trace(model)
    except Exception as e:  # noqa: BLE001 - torch.fx raises many kinds; the message says which
        raise ExportError(f"torch.fx could not trace {type(model).__name__}.forward: {type(e).__name__}: {e}. "
                          "Control flow that depends on the data cannot be traced; write it with tensor "
                          "operations, or export an earshot.Effect") from None
    gm = fx.GraphModule(tracer.root, graph)
    placeholders = [n for n in gm.graph.nodes if n.op == "placeholder"]
    if not placeholders:
        raise ExportError(f"{type(model).__name__}.forward takes no input")
    shapes = []
    convention = None
    for sizes in _SIZES:
        args, convention = _example_inputs(model, len(placeholders), len(specs), sizes)
        ShapeProp(gm).propagate(*args)
        shapes.append({n: tuple(n.meta["tensor_meta"].shape) for n in gm.graph.nodes
                       if isinstance(n.meta.get("tensor_meta"), torch.fx.passes.shape_prop.TensorMetadata)})
    ctl_names = _control_names(placeholders, specs, shapes)
    effect_inputs = _walk(gm, placeholders, specs, shapes, modes, ctl_names)
    chain, skip = effect_inputs
    names = [n for n, _ in chain.layers]
    if len(set(names)) != len(names):
        raise ExportError(f"a module is used twice in the forward ({names}); the file holds each layer once")
    fed = [n for n in chain.names if n != "audio"]
    if "audio" not in chain.names:
        raise ExportError("the audio argument never reaches the first layer")
    if specs and set(fed) - {c["name"] for c in specs}:
        raise ExportError(f"the forward feeds controls {fed}, the controls given are {[c['name'] for c in specs]}")
    if not specs:  # the controls are named after the forward's arguments
        specs = [control_spec(n) for p in placeholders[1:] for n in ctl_names[p]]
    try:
        effect = Effect(dict(chain.layers), inputs=chain.names, controls=specs or None, input_skip=skip)
    except ValueError as e:
        raise ExportError(f"the traced graph: {e}") from None
    return effect, convention


def _control_names(placeholders, specs, shapes):
    """Names of the control values each control argument carries, in order."""
    ctl_args = placeholders[1:]
    if not ctl_args:
        if specs:
            raise ExportError(f"controls {[c['name'] for c in specs]} were given but the forward takes only the audio")
        return {}
    out = {}
    if len(ctl_args) == 1:
        n = _count_values(ctl_args[0], shapes)
        names = [c["name"] for c in specs] if specs else ([ctl_args[0].name] if n == 1 else
                                                           [f"{ctl_args[0].name}{i}" for i in range(n)])
        if len(names) != n:
            raise ExportError(f"argument {ctl_args[0].name!r} carries {n} control values, {len(names)} controls given")
        out[ctl_args[0]] = names
        return out
    if specs and len(specs) != len(ctl_args):
        raise ExportError(f"the forward takes {len(ctl_args)} control arguments, {len(specs)} controls given")
    for i, p in enumerate(ctl_args):
        if _count_values(p, shapes) != 1:
            raise ExportError(f"control argument {p.name!r} must carry one value when there are several arguments")
        out[p] = [specs[i]["name"] if specs else p.name]
    return out


def _count_values(node, shapes):
    s1 = shapes[0][node]
    roles = _roles(s1, shapes[1][node])
    return _channels(s1, roles)


def _walk(gm, placeholders, specs, shapes, modes, ctl_names):
    all_controls = [c["name"] for c in specs] if specs else [n for p in placeholders[1:] for n in ctl_names[p]]
    vals = {}

    def roles_of(n):
        return _roles(shapes[0][n], shapes[1][n])

    def width_of(n):
        return _channels(shapes[0][n], roles_of(n))

    def val(a):
        if isinstance(a, (int, float)) and not isinstance(a, bool):
            return a
        return vals.get(a, _Opaque()) if isinstance(a, fx.Node) else _Opaque()

    def chain_in(node, what):
        v = val(node.args[0])
        if isinstance(v, _SkipSum):
            v = _wavenet_of(v)
        if not isinstance(v, _Chain):
            _refuse(f"{what} needs the signal as its input")
        if v.excess_right:
            _refuse(f"{what} receives {v.excess_right} samples of look-ahead: trim the padded convolution's "
                    f"output on the right ([..., :-{v.excess_right}]) before anything else")
        return v

    def activation(node, fn, **extra):
        c = chain_in(node, fn)
        if c.pad_left:
            _refuse(f"{fn} between a left pad and its convolution")
        from .modules import Activation
        return c.then(node.name, Activation(width_of(node), fn, **extra))

    for node in gm.graph.nodes:
        try:
            if node.op == "placeholder":
                if node is placeholders[0]:
                    vals[node] = _Chain(["audio"])
                else:
                    roles = roles_of(node)
                    names = ctl_names[node]
                    vals[node] = _Chain(names) if "T" in roles else _Controls(names)
            elif node.op == "get_attr":
                _refuse("a tensor attribute of the model used directly (not through a layer)")
            elif node.op == "output":
                v = val(node.args[0])
                if isinstance(v, _SkipSum):
                    v = _wavenet_of(v)
                if isinstance(v, _Chain):
                    v = _Final(v, False)
                if not isinstance(v, _Final):
                    _refuse("the output must be the signal (one channel per sample)")
                c = v.chain
                if c.pad_left or c.excess_right:
                    _refuse("the output still holds padding: trim a padded convolution's output on the right")
                if c.is_input:
                    _refuse("the output does not pass through any layer")
                if c.stack is not None:
                    _refuse("the output is a residual stack's state; a stack's output is the sum of its skips")
                w = width_of(node.args[0])
                if w != 1:
                    _refuse(f"the output has {w} channels; an effect gives one")
                return v.chain, v.skip
            elif node.op == "call_module":
                m = gm.get_submodule(node.target)
                vals[node] = _module(node, m, chain_in, roles_of, width_of, activation, val, modes.get(m, False))
            elif node.op == "call_function" or node.op == "call_method":
                vals[node] = _function(node, chain_in, roles_of, width_of, activation, val, all_controls)
        except _Refusal as r:
            src = _source(node)
            raise ExportError(f"{_op_text(node, gm)}{' at ' + src if src else ''}: {r}; {_SUPPORTED}") from None
        except ExportError as e:
            src = _source(node)
            raise ExportError(f"{_op_text(node, gm)}{' at ' + src if src else ''}: {e}") from None
    raise ExportError("the traced forward has no output")


def _module(node, m, chain_in, roles_of, width_of, activation, val, training):
    name = node.target
    if isinstance(m, _PASS_MODULES):
        return val(node.args[0])
    if isinstance(m, nn.ConstantPad1d):
        c = chain_in(node, "padding")
        left, right = m.padding
        if m.value != 0:
            _refuse(f"padding with {m.value}, not zeros")
        if right:
            _refuse(f"{right} samples of padding on the right look ahead in time (a causal effect pads on the left)")
        return c.padded(left)
    if isinstance(m, nn.BatchNorm1d) or "BatchNorm" in type(m).__name__:
        _refuse("batch normalisation is not a layer of the format"
                + (" (and the module is in training mode: its output depends on the batch)" if training
                   else "; fold its scale and shift into the layer before it"))
    if isinstance(m, nn.RNNBase):
        if len(node.args) > 1 or node.kwargs:
            _refuse("an initial state argument; the core starts from zeros, call the layer without one")
        c = chain_in(node, type(m).__name__)
        want = ["B", "T", "C"] if m.batch_first else ["T", "B", "C"]
        if roles_of(node.args[0]) != want:
            _refuse(f"input layout {roles_of(node.args[0])}, needs {want} (batch_first={m.batch_first})")
        if getattr(m, "bidirectional", False):
            _refuse(f"a bidirectional {type(m).__name__} is not causal")
        return _RecurrentOut(c.then(name, m))
    if isinstance(m, nn.Linear):
        if isinstance(val(node.args[0]), _Controls):
            return _CtlLinear(val(node.args[0]).names, name, m)
        c = chain_in(node, "Linear")
        if roles_of(node.args[0])[-1] != "C":
            _refuse(f"input layout {roles_of(node.args[0])}: Linear needs channels last")
        return c.then(name, m)
    if isinstance(m, nn.Conv1d):
        c = chain_in(node, "Conv1d")
        if m.stride != (1,):
            _refuse(f"stride {m.stride[0]} (the format runs every sample: stride 1)")
        if m.groups != 1:
            _refuse(f"groups={m.groups} (the format has full convolutions)")
        if roles_of(node.args[0]) != ["B", "C", "T"]:
            _refuse(f"input layout {roles_of(node.args[0])}, Conv1d needs ['B', 'C', 'T']")
        if m.padding_mode != "zeros":
            _refuse(f"padding_mode {m.padding_mode!r} (causal padding is zeros)")
        k, d = m.kernel_size[0], m.dilation[0]
        need = (k - 1) * d
        pad = m.padding[0] if isinstance(m.padding, tuple) else (0 if m.padding == "valid" else None)
        if pad is None:
            _refuse(f"padding={m.padding!r} pads both sides and looks ahead in time")
        if pad == 0:
            if c.pad_left != need:
                _refuse(f"kernel {k}, dilation {d} needs {need} samples of zero padding on the left before it, "
                        f"the forward gives {c.pad_left}" + (" (without it the output is shorter than the input)"
                                                             if c.pad_left == 0 else ""))
            return c.then(name, m)
        if c.pad_left:
            _refuse("padding both before the convolution and in it")
        if pad != need:
            _refuse(f"padding={pad} on both sides with kernel {k}, dilation {d}: "
                    + ("it looks ahead in time" if pad < need else f"it looks ahead {pad} samples")
                    + f"; a causal convolution pads {need} on the left (padding={need} and trim [..., :-{need}])")
        causal = CausalConv1d(m.in_channels, m.out_channels, k, d, bias=m.bias is not None)
        causal.weight = m.weight  # the researcher's own parameters, not a copy
        if m.bias is not None:
            causal.bias = m.bias
        return c.then(name, causal, excess_right=pad)
    if isinstance(m, _MODULE_ACTS):
        return chain_in(node, type(m).__name__).then(name, m)
    if isinstance(m, _EARSHOT_LAYERS) or type_of_module(m) is not None:
        c = chain_in(node, type(m).__name__)
        if roles_of(node.args[0])[-1] != "C":
            _refuse(f"input layout {roles_of(node.args[0])}: earshot's layer modules take channels last")
        return c.then(name, m)
    _refuse(f"module type {type(m).__module__}.{type(m).__qualname__} is not a layer of the format")


# ---- FiLM and the TCN block, written out --------------------------------------------------------

def _common_name(names, fallback):
    common = names[0].split(".")
    for n in names[1:]:
        parts = n.split(".")
        i = 0
        while i < min(len(common), len(parts)) and common[i] == parts[i]:
            i += 1
        common = common[:i]
    return ".".join(common) or fallback


def _film_of(chain, gamma, beta, all_controls, width):
    """chain.then(FiLM) with the MLP [gamma; beta] (Perez et al. 2018) from the two Linear layers."""
    if gamma.names != all_controls or beta.names != all_controls:
        _refuse(f"FiLM of controls {gamma.names}: the format feeds FiLM every control in order ({all_controls})")
    g, b = gamma.linear, beta.linear
    if g.out_features != width or b.out_features != width:
        _refuse(f"gamma and beta give {g.out_features} and {b.out_features} values for {width} channels")
    film = FiLM(width, len(all_controls), [])
    with torch.no_grad():
        film.mlp[0].weight = nn.Parameter(torch.cat([g.weight, b.weight]).detach().clone())
        bias = [m.bias if m.bias is not None else torch.zeros(width) for m in (g, b)]
        film.mlp[0].bias = nn.Parameter(torch.cat(bias).detach().clone())
    # named after the module holding gamma and beta; at the top level after gamma
    return chain.then(_common_name([gamma.name, beta.name], f"film.{gamma.name}"), film)


def _tcn_add(a, b):
    """x + act(FiLM(conv(pad(x)))) (identity residual) or res(x) + ... (1x1, no bias) -> the
    chain with a TCNBlock (Steinmetz & Reiss 2022, causal); None when a + b is not that."""
    from .layer_types import _activation_of
    for main, other in ((a, b), (b, a)):
        if not isinstance(main, _Chain) or not isinstance(other, _Chain) or len(main.layers) < 2:
            continue
        layers = main.layers
        has_film = len(layers) >= 3 and isinstance(layers[-2][1], FiLM)
        n_block = 3 if has_film else 2
        (cn, conv) = layers[-n_block]
        an, act = layers[-1]
        fn = _activation_of(act)
        if not isinstance(conv, nn.Conv1d) or fn is None:
            continue
        base = _Chain(main.names, layers[:-n_block], stack=main.stack)
        if other.stack is not base.stack or other.names != base.names:
            continue
        res = None
        if other.layers == base.layers:
            if conv.in_channels != conv.out_channels:
                continue
        elif other.layers[:-1] == base.layers and _conv_1x1(other.layers[-1][1]):
            res = other.layers[-1]
            if res[1].bias is not None:
                _refuse("a residual 1x1 convolution with a bias (the format's TCN residual has none)")
            if conv.in_channels == conv.out_channels:
                _refuse("a residual 1x1 convolution where in == out (the format's TCN adds x itself)")
        else:
            continue
        if conv.padding not in ((0,), "valid"):
            _refuse("pad the TCN block's convolution with F.pad on the left, not with padding=")
        fname, extra = fn
        film = layers[-2][1] if has_film else None
        block = TCNBlock(conv.in_channels, conv.out_channels, conv.kernel_size[0], conv.dilation[0],
                         bias=conv.bias is not None, activation=dict({"fn": fname}, **extra),
                         film={"hidden": [], "activation": "relu"} if has_film else None,
                         n_controls=film.n_controls if has_film else 0, residual=True)
        block.conv.weight, block.conv.bias = conv.weight, conv.bias
        if has_film:
            block.film.mlp[0].weight, block.film.mlp[0].bias = film.mlp[0].weight, film.mlp[0].bias
        if res is not None:
            block.res.weight = res[1].weight
        names = [cn, an] + ([res[0]] if res else [])
        return base.then(_common_name(names, "tcn"), block)
    return None


# ---- the gated residual stack, written out ------------------------------------------------------

def _conv_1x1(m):
    return isinstance(m, nn.Conv1d) and m.kernel_size[0] == 1


def _state_of(v):
    """(stack, depth, first chain) when v is a stack state h_l, else None."""
    if isinstance(v, _Chain) and v.stack is not None and not v.layers and not v.pad_left:
        return v.stack, len(v.stack.levels), v.stack.first
    if isinstance(v, _Chain) and v.stack is None and v.layers and _conv_1x1(v.layers[-1][1]) and not v.pad_left \
            and not v.excess_right:
        return None, 0, v
    return None


def _term(v):
    """(base value, conv name, conv, last name, last module) when v is conv -> gate -> 1x1 conv of a
    stack state, else None."""
    if not isinstance(v, _Chain) or len(v.layers) < 3 or v.pad_left or v.excess_right:
        return None
    (cn, conv), (_, gate), (ln, last) = v.layers[-3:]
    if not (isinstance(conv, nn.Conv1d) and isinstance(gate, Gated) and _conv_1x1(last)):
        return None
    base = _Chain(v.names, v.layers[:-3], stack=v.stack)
    if _state_of(base) is None:
        return None
    return base, cn, conv, ln, last


def _same_state(a, b):
    sa, sb = _state_of(a), _state_of(b)
    if sa is None or sb is None:
        return False
    if sa[0] is not None or sb[0] is not None:
        return sa[0] is sb[0]
    return sa[2].layers == sb[2].layers and sa[2].names == sb[2].names


def _stack_add(a, b):
    """The additions of a written-out stack: h + res(g) -> the next state; skip terms -> a
    _SkipSum. None when a + b is neither."""
    for state, term in ((a, b), (b, a)):
        t = _term(term)
        if t is not None and _same_state(state, t[0]):
            st, depth, first = _state_of(state)
            levels = (st.levels if st else []) + [(t[1], t[2], t[3], t[4])]
            return _Chain(first.names, [], stack=_Stack(first, levels))
    parts = []
    for v in (a, b):
        if isinstance(v, _SkipSum):
            parts += v.terms
        elif isinstance(v, (int, float)) and v == 0:
            continue
        else:
            t = _term(v)
            if t is None:
                return None
            st, depth, first = _state_of(t[0])
            parts.append((depth, t[1], t[2], t[3], t[4], t[0]))
    return _SkipSum(parts) if parts else None


def _wavenet_of(total):
    """The Chain whose last layer is an earshot.WaveNet holding the stack's own parameters."""
    from .modules import WaveNet as EarshotWaveNet
    terms = sorted(total.terms, key=lambda t: t[0])
    if [t[0] for t in terms] != list(range(len(terms))):
        _refuse(f"skip terms of levels {[t[0] for t in terms]}; a stack sums one skip per level, 0 .. L-1")
    deepest = max((t[5] for t in terms), key=lambda v: _state_of(v)[1])
    st, depth, first = _state_of(deepest)
    levels = list(st.levels) if st else []
    if len(terms) not in (len(levels), len(levels) + 1):
        _refuse(f"{len(terms)} skip terms for {len(levels)} residual levels")
    for i, t in enumerate(terms):
        if i < len(levels) and levels[i][1] is not t[2]:
            _refuse(f"the skip of level {i} comes from another convolution than its residual")
    inp_name, inp = first.layers[-1]
    convs = [t[2] for t in terms]
    skips = [t[4] for t in terms]
    res = [lv[3] for lv in levels] + [None] * (len(terms) - len(levels))
    C, k = inp.out_channels, convs[0].kernel_size[0]
    S = skips[0].out_channels
    bias = inp.bias is not None
    for i, (c, sk, r) in enumerate(zip(convs, skips, res)):
        if c.kernel_size[0] != k or c.in_channels != C or c.out_channels != 2 * C or c.stride != (1,) or c.groups != 1:
            _refuse(f"level {i}: the stack's convolutions must all be Conv1d({C}, {2 * C}, kernel {k})")
        if sk.out_channels != S or sk.in_channels != C or (r is not None and (r.in_channels, r.out_channels) != (C, C)):
            _refuse(f"level {i}: residual 1x1 must be {C} -> {C} and skip {C} -> {S}")
        if any((m.bias is not None) != bias for m in (c, sk) + ((r,) if r is not None else ())):
            _refuse("the stack's convolutions must all have a bias, or none")
        if any(m.padding not in ((0,), "valid") for m in (c, sk) + ((r,) if r is not None else ())):
            _refuse(f"level {i}: pad the stack's convolutions with F.pad on the left, not with padding=")
    wn = EarshotWaveNet(inp.in_channels, C, S, k, [c.dilation[0] for c in convs], bias)
    wn.input.weight, wn.input.bias = inp.weight, inp.bias
    for i, (c, sk, r) in enumerate(zip(convs, skips, res)):
        layer = wn.layers[i]
        layer.conv.weight, layer.conv.bias = c.weight, c.bias
        layer.skip.weight, layer.skip.bias = sk.weight, sk.bias
        if r is not None:
            layer.res.weight, layer.res.bias = r.weight, r.bias
        else:  # the last level's residual is never used: zeros add nothing
            with torch.no_grad():
                layer.res.weight.zero_()
                if bias:
                    layer.res.bias.zero_()
    names = [inp_name] + [t[1] for t in terms] + [t[3] for t in terms] + [lv[2] for lv in levels]
    return _Chain(first.names, first.layers[:-1] + [(_common_name(names, "wavenet"), wn)])


def _dim_arg(node, pos, default=None):
    if len(node.args) > pos:
        return node.args[pos]
    return node.kwargs.get("dim", default)


def _function(node, chain_in, roles_of, width_of, activation, val, all_controls):
    t = node.target
    is_method = node.op == "call_method"
    # sizes and shapes: arguments of layout changes
    if (not is_method and t is getattr) or (is_method and t in ("size", "dim")):
        return _Opaque()
    if not is_method and t is operator.getitem:
        src = val(node.args[0])
        idx = node.args[1]
        if isinstance(src, _Opaque):
            return _Opaque()
        if isinstance(src, _RecurrentOut):
            if idx == 0:
                return src.chain
            if not node.users:
                return _Opaque()  # `h, _ = rnn(x)`: the state is unpacked and dropped
            _refuse("the recurrent state output is used; the format keeps the state inside the layer")
        if isinstance(src, _Chunks):
            return _Half(src.chain, idx)
        if isinstance(src, _Chain):
            return _slice(node, src, idx, roles_of)
        _refuse("indexing a value that is not the signal")
    if (is_method and t in _LAYOUT_METHODS) or (not is_method and t in _LAYOUT_FUNCTIONS):
        v = val(node.args[0])
        if isinstance(v, _Controls):
            return _Chain(v.names) if "T" in roles_of(node) else v
        if isinstance(v, (_SkipSum, _CtlLinear)):
            return v
        if isinstance(v, (_Chain, _Half)):
            if isinstance(v, _Chain) and sorted(r for r in roles_of(node) if r != "C") != sorted(
                    r for r in roles_of(node.args[0]) if r != "C"):
                _refuse("a reshape that mixes batch or time with channels")
            return v
        return _Opaque()
    if not is_method and t in (torch.cat, torch.concat):
        parts = [val(a) for a in node.args[0]]
        dim = _dim_arg(node, 1, 0)
        if roles_of(node)[dim] != "C":
            _refuse(f"concatenation on a {'batch' if roles_of(node)[dim] == 'B' else 'time'} axis; "
                    "audio and controls are concatenated on the channel axis")
        if all(isinstance(p, _Controls) for p in parts):
            return _Controls([n for p in parts for n in p.names])
        names = []
        for p in parts:
            if isinstance(p, _Controls):
                _refuse("controls [B, n] concatenated before they are broadcast over time "
                        "(unsqueeze(1).expand(-1, T, -1))")
            if not isinstance(p, _Chain) or not p.is_input:
                _refuse("concatenation of signals after a layer (the file's graph is one chain)")
            names += p.names
        return _Chain(names)
    if (not is_method and t in (torch.chunk,)) or (is_method and t == "chunk"):
        c = chain_in(node, "chunk")
        chunks = node.args[1] if len(node.args) > 1 else node.kwargs.get("chunks")
        dim = _dim_arg(node, 2, 0)
        if chunks != 2 or roles_of(node.args[0])[dim] != "C":
            _refuse("chunk other than 2 halves on the channel axis (the gated unit)")
        return _Chunks(c)
    act = _FUNCTIONAL_ACTS.get(t) if not is_method else _METHOD_ACTS.get(t)
    if act is not None:
        v = val(node.args[0])
        if isinstance(v, _Half):
            if v.fn is not None:
                _refuse(f"{act} of an activated half")
            return _Half(v.chain, v.index, act)
        extra = {}
        if act == "leaky_relu":
            extra["slope"] = float(node.args[1] if len(node.args) > 1 else node.kwargs.get("negative_slope", 0.01))
        if act == "hardtanh":
            extra["min"] = float(node.args[1] if len(node.args) > 1 else node.kwargs.get("min_val", -1.0))
            extra["max"] = float(node.args[2] if len(node.args) > 2 else node.kwargs.get("max_val", 1.0))
        return activation(node, act, **extra)
    if not is_method and t is F.pad:
        c = chain_in(node, "F.pad")
        pad = node.args[1] if len(node.args) > 1 else node.kwargs.get("pad")
        mode = node.kwargs.get("mode", node.args[2] if len(node.args) > 2 else "constant")
        value = node.kwargs.get("value", node.args[3] if len(node.args) > 3 else 0)
        if roles_of(node.args[0])[-1] != "T" or len(pad) != 2:
            _refuse("padding of an axis other than time")
        if mode != "constant" or value not in (0, 0.0, None):
            _refuse("padding other than zeros")
        if pad[1]:
            _refuse(f"{pad[1]} samples of padding on the right look ahead in time (a causal effect pads on the left)")
        return c.padded(pad[0])
    if (not is_method and t in (operator.add, torch.add)) or (is_method and t == "add"):
        a, b = val(node.args[0]), val(node.args[1])
        stacked = _stack_add(a, b)
        if stacked is not None:
            return stacked
        for sc, beta in ((a, b), (b, a)):
            if isinstance(sc, _Scaled) and isinstance(beta, _CtlLinear):
                return _film_of(sc.chain, sc.gamma, beta, all_controls, width_of(node))
        block = _tcn_add(a, b)
        if block is not None:
            return block
        for out, inp in ((a, b), (b, a)):
            if isinstance(out, _Chain) and isinstance(inp, _Chain) and inp.is_audio and not out.is_input:
                if out.pad_left or out.excess_right:
                    _refuse("the residual add of padded output")
                if width_of(node) != 1:
                    _refuse("the residual add of the input must come after the layer giving one channel")
                return _Final(out, True)
        _refuse("an addition other than the residual add of the input to the one-channel output")
    if (not is_method and t in (operator.mul, torch.mul)) or (is_method and t == "mul"):
        a, b = val(node.args[0]), val(node.args[1])
        for g, c in ((a, b), (b, a)):
            if isinstance(g, _CtlLinear) and isinstance(c, _Chain) and not c.is_input:
                if c.pad_left or c.excess_right:
                    _refuse("FiLM of padded output")
                return _Scaled(c, g)
        if isinstance(a, _Half) and isinstance(b, _Half) and a.chain is b.chain:
            by_fn = {a.fn: a.index, b.fn: b.index}
            if by_fn.get("tanh") == 0 and by_fn.get("sigmoid") == 1:
                return a.chain.then(node.name, Gated(2 * width_of(node)))
        _refuse("a product other than the gated unit tanh(first half) * sigmoid(second half)")
    _refuse("this operation is not one the format expresses")


def _slice(node, chain, idx, roles_of):
    """x[..., :-p] that trims a padded convolution's look-ahead; anything else is refused."""
    roles = roles_of(node.args[0])
    parts = idx if isinstance(idx, tuple) else (idx,)
    if Ellipsis in parts:
        k = parts.index(Ellipsis)
        parts = parts[:k] + (slice(None),) * (len(roles) - len(parts) + 1) + parts[k + 1:]
    parts = parts + (slice(None),) * (len(roles) - len(parts))
    for r, p in zip(roles, parts):
        if p == slice(None):
            continue
        if r == "T" and isinstance(p, slice) and p.start in (None, 0) and p.step in (None, 1) and \
                isinstance(p.stop, int) and p.stop < 0 and chain.excess_right == -p.stop:
            return chain.trimmed()
        _refuse(f"slicing {parts} of a {roles} signal (only trimming a padded convolution's "
                f"{chain.excess_right} samples of look-ahead on the right is expressible)")
    return chain
