// The model-graph view: for each nn.Module subclass, its layers named as named_modules() names them, and the
// direct feeds through forward (layer B consumes exactly the tensor layer A produced).
import type { CallExpr, ClassStmt, Expr, Span } from '../ir';
import { Interp, type CallObserver, type FlowRecorder, type Frame } from '../interp';
import type { ClassInfo, FuncInfo, ModuleInst, Value } from '../values';
import { UNKNOWN } from '../values';
import type { Workspace } from '../workspace';
import { familyOf, layerSpec, type Family } from '../torch-catalog';

export interface Layer {
  /** Qualified name as `named_modules()` gives it: `features.0`, `layer1.0.bn1`. */
  name: string;
  inst: ModuleInst;
  /** Canonical type: `torch.nn.BatchNorm2d`, or `path::Class` for a user module with no submodules. */
  type: string;
  family: Family;
  /** File and call that constructed it (may be in another file than the class). */
  site?: { path: string; call: CallExpr };
  /** Channels and rank of the tensor it was called on in forward, where known. */
  input?: { ch?: number; rank?: number; from: Layer[] };
}

/** A call the interpreter evaluated while tracing forward (and whatever forward called), with resolved values. */
export interface ForwardCall {
  call: CallExpr;
  /** File that holds the call. */
  path: string;
  /** The callee as the interpreter resolved it (through imports, aliases, `from ... import ... as`). */
  callee: Value;
  /** Canonical library name when the callee is a library object: `torch.nn.functional.dropout`. */
  q?: string;
  args: Value[];
  kwargs: Map<string, Value>;
  /** The user function whose body holds the call. */
  fn?: FuncInfo;
  /** The nn.Module that is `self` of that function, when it is a method of a module. */
  self?: ModuleInst;
  /** What the call gave (a tensor's identity links it to the layers and calls that take it). */
  result: Value;
}

/**
 * A parameter initialisation made while the model was constructed: an `nn.init.*` call, or an in-place tensor method
 * (`m.weight.data.normal_(...)`), in `__init__`, a helper it calls, an `apply(fn)` callback or an init loop.
 */
export interface InitCall {
  /** `torch.nn.init.kaiming_normal_`, or `tensor.normal_` for an in-place method. */
  q: string;
  path: string;
  call: CallExpr;
  args: Value[];
  kwargs: Map<string, Value>;
  /** The leaf layer and parameter it initialises, when the interpreter knows which. */
  layer?: Layer;
  param?: string;
}

/** A node of the forward data path: a layer, or a torch function / tensor method called on a tensor. */
export type FlowNode = Layer | ForwardCall;

export interface ModelGraph {
  cls: ClassInfo;
  path: string;
  className: string;
  classSpan: Span;
  root: ModuleInst;
  /** Leaf layers in registration order. */
  layers: Layer[];
  /** Every module (leaf or container) with its qualified name; the root is ''. */
  modules: { name: string; inst: ModuleInst }[];
  /** Direct feeds [from, to] observed through forward, deduplicated, in first-seen order. */
  flow: [Layer, Layer][];
  /** Whether forward was traced (false when the class has no forward the engine could follow). */
  traced: boolean;
  /** Layers the engine could not resolve (unknown library constructors). */
  opaque: Layer[];
  byInst: Map<ModuleInst, Layer>;
  /** Calls evaluated while tracing forward, in evaluation order (a call in an unrolled loop appears per pass). */
  calls: ForwardCall[];
  /** Parameter initialisations made during construction, in execution order (the last one of a parameter wins). */
  inits: InitCall[];
  /** The tensor each leaf was last called on in forward (its identity links it to the call that made it). */
  inputTensors?: Map<ModuleInst, Value>;
  /**
   * Layers whose output is also used other than as a layer's input: in arithmetic, by a library, tensor-method or
   * helper call (shape queries aside), or in the value forward returns. A feed `a > b` is then not all `a` does.
   */
  sharedOutputs: Set<Layer>;
}

/** Tensor methods that read only the shape, so using an output this way does not depend on its values. */
const SHAPE_QUERIES = new Set(['size', 'dim', 'ndimension', 'numel', 'nelement']);

/**
 * Whether argument `index` / keyword `name` of a call is given, and its expression. `maybe` when a `*args` at or
 * before the position, or a `**kwargs`, could supply it.
 */
export function callArg(call: CallExpr, index: number, name: string): { given: 'yes'; expr: Expr; keyword: boolean } | { given: 'no' | 'maybe' } {
  const kw = call.kwargs.find((k) => k.name === name);
  if (kw) return { given: 'yes', expr: kw.value, keyword: true };
  const starAt = call.args.findIndex((a) => a.k === 'star');
  if (starAt >= 0 && starAt <= index) return { given: 'maybe' };
  if (index < call.args.length) return { given: 'yes', expr: call.args[index], keyword: false };
  if (call.starKwargs.length) return { given: 'maybe' };
  return { given: 'no' };
}

export function isLeafLike(m: ModuleInst): boolean {
  return m.children.length === 0;
}

/** Qualified names in registration order; a module registered twice keeps its first name (named_modules memo). */
export function nameModules(root: ModuleInst): { name: string; inst: ModuleInst }[] {
  const out: { name: string; inst: ModuleInst }[] = [];
  const seen = new Set<ModuleInst>();
  const stack: { name: string; inst: ModuleInst }[] = [{ name: '', inst: root }];
  while (stack.length) {
    const cur = stack.pop()!;
    if (seen.has(cur.inst)) continue;
    seen.add(cur.inst);
    out.push(cur);
    const kids = cur.inst.children;
    for (let i = kids.length - 1; i >= 0; i--) {
      const [n, c] = kids[i];
      stack.push({ name: cur.name ? `${cur.name}.${n}` : n, inst: c });
    }
  }
  return out;
}

export class ModelGraphs {
  private readonly byClass = new Map<ClassStmt, ModelGraph | null>();
  private classes: ClassInfo[] | undefined;
  private classesByPath: Map<string, ClassInfo[]> | undefined;

  constructor(readonly ws: Workspace, readonly interp: Interp) {}

  /** Every class in the workspace that is an nn.Module subclass (through user subclasses too). */
  moduleClasses(path?: string): ClassInfo[] {
    if (!this.classes) {
      const out: ClassInfo[] = [];
      for (const [p, f] of this.ws.files) {
        const scope = this.interp.moduleScope(p);
        for (const c of f.facts.classes) {
          const info = this.interp.classInfo(c, scope, p);
          try {
            if (this.interp.isTorchModuleClass(info)) out.push(info);
          } catch {
            // a class the interpreter cannot follow is not a model we can describe
          }
        }
      }
      this.classes = out;
    }
    if (!path) return this.classes;
    // indexed once: rules ask per file and per candidate, and a filter over every class each time is quadratic
    if (!this.classesByPath) {
      this.classesByPath = new Map();
      for (const c of this.classes) this.classesByPath.set(c.path, [...(this.classesByPath.get(c.path) ?? []), c]);
    }
    return this.classesByPath.get(path) ?? [];
  }

  graph(cls: ClassInfo): ModelGraph | undefined {
    if (this.byClass.has(cls.stmt)) return this.byClass.get(cls.stmt) ?? undefined;
    let g: ModelGraph | null = null;
    try {
      g = this.build(cls);
    } finally {
      this.byClass.set(cls.stmt, g);
    }
    return g ?? undefined;
  }

  graphsIn(path: string): ModelGraph[] {
    return this.moduleClasses(path).map((c) => this.graph(c)).filter((g): g is ModelGraph => !!g);
  }

  all(): ModelGraph[] {
    return this.moduleClasses().map((c) => this.graph(c)).filter((g): g is ModelGraph => !!g);
  }

  /**
   * A layer site can sit in several graphs (a Block alone and inside a Net). The order a finding at a site in
   * `sitePath` takes its wording from, the same whichever file is checked: graphs of the site's own file, then of the
   * checked file, then the rest of the workspace.
   */
  *graphOrder(sitePath: string, checkedPath: string): Generator<ModelGraph> {
    // lazy: callers stop at the first graph that has their site, usually one of the site's own file
    const seen = new Set<ModelGraph>();
    for (const list of [() => this.graphsIn(sitePath), () => this.graphsIn(checkedPath), () => this.all()]) {
      for (const g of list()) {
        if (seen.has(g)) continue;
        seen.add(g);
        yield g;
      }
    }
  }

  /**
   * For a call `a.b.Name(...)`, the library module `a.b` denotes in the file's module scope (`torch.nn` for
   * `nn.Dropout(...)` after `from torch import nn`), so a fix may rename `Name`; undefined for other callee shapes.
   */
  calleeOwner(path: string, call: CallExpr): string | undefined {
    if (call.fn.k !== 'attr') return undefined;
    const frame: Frame = { scope: this.interp.moduleScope(path), path, body: [], done: false, depth: 0 };
    try {
      const v = this.interp.evalExpr(call.fn.obj, frame);
      return v.t === 'ext' ? v.q : undefined;
    } catch {
      return undefined;
    }
  }

  private build(cls: ClassInfo): ModelGraph {
    const frame: Frame = { scope: cls.scope, path: cls.path, body: [], done: false, depth: 0 };
    const rawInits: (Omit<InitCall, 'layer' | 'param'> & { target?: { inst: ModuleInst; param: string } })[] = [];
    const initObserver: CallObserver = (call, callee, args, kwargs, fr) => {
      if (callee.t === 'ext' && callee.q.startsWith('torch.nn.init.')) {
        rawInits.push({ q: callee.q, path: fr.path, call, args, kwargs, target: paramOf(args[0] ?? kwargs.get('tensor')) });
      } else if (callee.t === 'obj') {
        const method = callee.q.slice(callee.q.lastIndexOf('.') + 1);
        const target = method.endsWith('_') && !method.startsWith('_') ? paramOf(callee.state.get('__bound__')) : undefined;
        if (target) rawInits.push({ q: `tensor.${method}`, path: fr.path, call, args, kwargs, target });
      }
    };
    let v: Value;
    this.interp.observers.push(initObserver);
    try {
      v = this.interp.instantiate(cls, [], new Map(), frame);
    } finally {
      const at = this.interp.observers.indexOf(initObserver);
      if (at >= 0) this.interp.observers.splice(at, 1);
    }
    if (v.t !== 'module') throw new Error(`${cls.name} did not build a module`);
    const root = v.m;
    const modules = nameModules(root);
    const layers: Layer[] = [];
    const byInst = new Map<ModuleInst, Layer>();
    for (const { name, inst } of modules) {
      if (!name || !isLeafLike(inst)) continue;
      const layer: Layer = { name, inst, type: inst.type, family: familyOf(inst.type), site: inst.site };
      layers.push(layer);
      byInst.set(inst, layer);
    }
    // trace forward once with a fresh input tensor
    const rec: FlowRecorder = { feeds: [], inputs: new Map(), called: new Set() };
    const calls: ForwardCall[] = [];
    const observe: CallObserver = (call, callee, args, kwargs, fr, result) => {
      if (fr.recorder !== rec) return;
      calls.push({
        call, path: fr.path, callee, q: callee.t === 'ext' ? callee.q : undefined, args, kwargs, fn: fr.fn,
        self: fr.fn?.owner && fr.self?.t === 'module' ? fr.self.m : undefined, result,
      });
    };
    this.interp.observers.push(observe);
    let traced = false;
    let returned: Value = UNKNOWN;
    try {
      const fwd = this.interp.classMember(cls, 'forward');
      if (fwd && fwd.value.t === 'func') {
        const ff: Frame = { ...frame, recorder: rec };
        const params = fwd.value.fn.stmt.params.filter((p) => p.kind === 'normal').slice(1);
        const args: Value[] = params.map((p, i) => (i === 0 || !p.default ? { t: 'tensor', from: [] } : UNKNOWN));
        // parameters with defaults keep them (bindParams evaluates them)
        try {
          returned = this.interp.callFunction(fwd.value.fn, v, args.slice(0, params.filter((p) => !p.default).length || 1), new Map(), ff);
          traced = true;
        } catch {
          traced = false;
        }
      } else if (root.kind === 'user' && root.cls && this.interp.externalBases(root.cls).includes('torch.nn.Sequential')) {
        this.interp.call({ t: 'module', m: root }, [{ t: 'tensor', from: [] }], new Map(), { ...frame, recorder: rec });
        traced = true;
      }
    } finally {
      const at = this.interp.observers.indexOf(observe);
      if (at >= 0) this.interp.observers.splice(at, 1);
    }
    const flow: [Layer, Layer][] = [];
    const seenPair = new Set<string>();
    for (const [a, b] of rec.feeds) {
      const la = byInst.get(a);
      const lb = byInst.get(b);
      if (!la || !lb) continue;
      const key = `${la.name}\0${lb.name}`;
      if (seenPair.has(key)) continue;
      seenPair.add(key);
      flow.push([la, lb]);
    }
    for (const [inst, t] of rec.inputs) {
      const l = byInst.get(inst);
      if (l) l.input = { ch: t.ch, rank: t.rank, from: t.from.map((f) => byInst.get(f)).filter((x): x is Layer => !!x) };
    }
    const sharedOutputs = new Set<Layer>();
    const share = (val: Value | undefined, depth = 0): void => {
      if (!val || depth > 4) return;
      if (val.t === 'tensor') for (const m of val.from) {
        const l = byInst.get(m);
        if (l) sharedOutputs.add(l);
      }
      else if (val.t === 'list') for (const x of val.items) share(x, depth + 1);
      else if (val.t === 'dict') for (const x of val.map.values()) share(x, depth + 1);
    };
    for (const m of rec.operands ?? []) {
      const l = byInst.get(m);
      if (l) sharedOutputs.add(l);
    }
    for (const c of calls) {
      if (c.callee.t === 'module') continue;
      if (c.callee.t === 'obj') {
        const method = c.callee.q.slice(c.callee.q.lastIndexOf('.') + 1);
        if (SHAPE_QUERIES.has(method)) continue;
        share(c.callee.state.get('__bound__'));
      }
      for (const a of c.args) share(a);
      for (const a of c.kwargs.values()) share(a);
    }
    share(returned);
    const opaque = layers.filter((l) => l.inst.kind === 'opaque' || (l.inst.kind === 'leaf' && !layerSpec(l.type) && l.family === 'other' && !l.type.startsWith('torch.nn.')));
    const inits: InitCall[] = rawInits.map(({ target, ...r }) => ({ ...r, layer: target && byInst.get(target.inst), param: target?.param }));
    return { cls, path: cls.path, className: cls.name, classSpan: cls.stmt.nameSpan, root, layers, modules, flow, traced, opaque, byInst, calls, inits, inputTensors: rec.inputs, sharedOutputs };
  }

  /** Layers fed directly by `l`, and those feeding it. */
  static consumers(g: ModelGraph, l: Layer): Layer[] {
    return g.flow.filter(([a]) => a === l).map(([, b]) => b);
  }

  static producers(g: ModelGraph, l: Layer): Layer[] {
    return g.flow.filter(([, b]) => b === l).map(([a]) => a);
  }

  /**
   * Layers the output of `start` reaches in forward, following layer feeds and tensor calls (`F.relu`, `torch.cat`,
   * `x.view`), linked by tensor identity; `through` decides whether a path goes on past a node it reached (the layer is
   * still reported). `via` lists the nodes between. Each node is visited once, nearest first.
   */
  static downstream(g: ModelGraph, start: FlowNode, through: (n: FlowNode) => boolean): { layer: Layer; via: FlowNode[] }[] {
    const links = tensorLinks(g);
    const out: { layer: Layer; via: FlowNode[] }[] = [];
    const seen = new Set<FlowNode>([start]);
    const queue: { n: FlowNode; via: FlowNode[] }[] = [{ n: start, via: [] }];
    while (queue.length) {
      const { n, via } = queue.shift()!;
      const next = isForwardCall(n) ? links.callNext.get(n) ?? [] : [...ModelGraphs.consumers(g, n), ...(links.layerNext.get(n) ?? [])];
      for (const m of next) {
        if (seen.has(m)) continue;
        seen.add(m);
        if (!isForwardCall(m)) out.push({ layer: m, via });
        if (through(m)) queue.push({ n: m, via: [...via, m] });
      }
    }
    return out;
  }
}

export function isForwardCall(n: FlowNode): n is ForwardCall {
  return 'callee' in n;
}

/** `torch.nn.functional.dropout` for a library function, `tensor.view` for a tensor method; undefined otherwise. */
export function tensorCallName(c: ForwardCall): string | undefined {
  if (c.q) return c.q;
  if (c.callee.t === 'obj' && c.callee.state.get('__bound__')?.t === 'tensor') return `tensor.${c.callee.q.slice(c.callee.q.lastIndexOf('.') + 1)}`;
  return undefined;
}

/** The tensors a call takes: arguments (and items of list arguments, as torch.cat's), and the tensor a method is bound to. */
function tensorArgs(c: ForwardCall): Value[] {
  const vals = [...c.args, ...c.kwargs.values()].flatMap((a) => (a.t === 'list' ? a.items : [a]));
  const bound = c.callee.t === 'obj' ? c.callee.state.get('__bound__') : undefined;
  if (bound) vals.push(bound);
  return vals.filter((a) => a.t === 'tensor');
}

const linkCache = new WeakMap<ModelGraph, { layerNext: Map<Layer, ForwardCall[]>; callNext: Map<ForwardCall, FlowNode[]> }>();

/** Which library calls take a layer's output or a call's result, and which layers are called on a call's result. */
function tensorLinks(g: ModelGraph): { layerNext: Map<Layer, ForwardCall[]>; callNext: Map<ForwardCall, FlowNode[]> } {
  const hit = linkCache.get(g);
  if (hit) return hit;
  const layerNext = new Map<Layer, ForwardCall[]>();
  const callNext = new Map<ForwardCall, FlowNode[]>();
  const byResult = new Map<Value, ForwardCall>();
  const push = <K, V>(m: Map<K, V[]>, k: K, v: V) => {
    const l = m.get(k) ?? [];
    if (!l.includes(v)) l.push(v);
    m.set(k, l);
  };
  for (const c of g.calls) {
    if (!tensorCallName(c)) continue;
    for (const t of tensorArgs(c)) {
      const prev = byResult.get(t);
      if (prev) push(callNext, prev, c);
      if (t.t === 'tensor') for (const f of t.from) {
        const l = g.byInst.get(f);
        if (l) push(layerNext, l, c);
      }
    }
    if (c.result.t === 'tensor') byResult.set(c.result, c);
  }
  for (const l of g.layers) {
    const t = l.inst && inputTensor(g, l);
    const c = t && byResult.get(t);
    if (c) push(callNext, c, l);
  }
  const links = { layerNext, callNext };
  linkCache.set(g, links);
  return links;
}

function inputTensor(g: ModelGraph, l: Layer): Value | undefined {
  return g.inputTensors?.get(l.inst);
}

/** `m.weight`, `m.weight.data`: the module and parameter name an init call's tensor argument denotes. */
function paramOf(v: Value | undefined): { inst: ModuleInst; param: string } | undefined {
  for (let i = 0; v && v.t === 'obj' && i < 4; i++) {
    const bound = v.state.get('__bound__');
    if (bound?.t === 'module') {
      const param = v.q.slice(v.q.lastIndexOf('.') + 1);
      return param === 'weight' || param === 'bias' ? { inst: bound.m, param } : undefined;
    }
    if (!v.q.endsWith('().data')) return undefined;
    v = bound;
  }
  return undefined;
}
