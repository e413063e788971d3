// The training view: mode state (train/eval) of module variables along program order, function summaries across
// calls, evaluation regions, training steps, optimizers, freezing, distributed wrappers and loader↔model pairs.
import * as posix from 'node:path/posix';
import type { CallExpr, DefStmt, Expr, Span, Stmt } from '../ir';
import { dottedName, exprChildren, stmtBlocks } from '../ir';
import type { Frame, Interp } from '../interp';
import { BATCH_STAT_FAMILIES, DROPOUT_FAMILIES, familyOf, isKnownCaringConstructor } from '../torch-catalog';
import type { FuncInfo, ModuleInst, Value } from '../values';
import { UNKNOWN, num, truthy } from '../values';
import type { Workspace } from '../workspace';

/** A place in the analysed text of a file. */
export interface Site {
  path: string;
  span: Span;
}

/** Where an eval mode came from: the `.eval()` call itself, and the statement of the current function that led to it. */
export interface EvalOrigin {
  report: Site;
  /** `model.eval()` or `model.train(False)`, for messages. */
  text: string;
  /** Function that holds the switch, for messages. */
  fn: string;
  /** Span, in the function being walked, of the call or switch that brought the eval mode here. */
  local: Span;
}

/**
 * The modes a module may be in at a program point: train, eval (with where it was set), "as at function entry"
 * (whatever the caller had), or unknown (not a value the view can follow).
 */
export interface Mode {
  t: boolean;
  n: boolean;
  u: boolean;
  e: EvalOrigin[];
}

const TRAIN: Mode = { t: true, n: false, u: false, e: [] };
const ENTRY: Mode = { t: false, n: true, u: false, e: [] };
const UNKNOWN_MODE: Mode = { t: false, n: false, u: true, e: [] };

function joinMode(a: Mode, b: Mode): Mode {
  const e = [...a.e];
  for (const o of b.e) if (!e.some((x) => sameOrigin(x, o))) e.push(o);
  return { t: a.t || b.t, n: a.n || b.n, u: a.u || b.u, e };
}

function originKey(o: EvalOrigin): string {
  return `${o.report.path}\0${o.report.span.start}\0${o.local.start}`;
}

function sameOrigin(a: EvalOrigin, b: EvalOrigin): boolean {
  return a.report.path === b.report.path && a.report.span.start === b.report.span.start && a.local.start === b.local.start;
}

function sameMode(a: Mode, b: Mode): boolean {
  return a.t === b.t && a.n === b.n && a.u === b.u && a.e.length === b.e.length && a.e.every((o) => b.e.some((x) => sameOrigin(o, x)));
}

/** Replaces "as at entry" by the caller's mode; the callee's eval origins are relocated to the call site. */
function substMode(callee: Mode, caller: Mode, callSpan: Span): Mode {
  const own: Mode = { ...callee, e: callee.e.map((o) => ({ ...o, local: callSpan })) };
  if (!callee.n) return own;
  return joinMode({ ...own, n: false }, caller);
}

export interface ModuleRef {
  /** Canonical key in the function that holds the event (dotted, aliases resolved). */
  key: string;
  /** The expression as written where the event happened (for fixes there). */
  text: string;
  value: Value;
}

export interface EvalEvent {
  ref: ModuleRef;
  mode: Mode;
  /** The region: the `with` item expression, or the decorator. */
  region: Site;
  /** Where `MODEL.eval()` goes: before this statement (same indentation), at `path`. */
  insertBefore: Stmt;
  insertPath: string;
  fnName: string;
  /** Call sites from the function that had the mode to the region, outermost first. */
  via: Site[];
  quiet: boolean;
  /**
   * False when the region exists only on some passes of code shared by all of them
   * (`torch.set_grad_enabled(phase == "train")`): an `.eval()` inserted before it would also run on the training pass.
   */
  fixable: boolean;
}

export interface TrainPoint {
  ref: ModuleRef;
  mode: Mode;
  /** The backward/step (or the call leading to it) in the function being walked. */
  local: Span;
  /** The backward()/step() call itself. */
  report: Site;
  reportText: string;
}

export interface TrainResume {
  origin: EvalOrigin;
  point: TrainPoint;
  /** The loop whose body resumes training, and the file it is in. */
  loop: Extract<Stmt, { k: 'for' | 'while' }>;
  path: string;
  /** Expression for `X.train()` in that loop. */
  text: string;
  fnName: string;
}

export interface Pair {
  /** The model's mode while the loop trains it, and whether parts of it were put in eval (frozen BatchNorm). */
  mode: Mode;
  partsEval: boolean;
  model: Value;
  loader: Value;
  /** The loop over the loader (in the file where it is written). */
  loop: Site;
  /** The call chain from where both values are known to the loop, outermost first. */
  via: Site[];
}

export interface OptimizerUse {
  path: string;
  call: CallExpr;
  /** Canonical class: torch.optim.Adam. */
  type: string;
  weightDecay: Value;
  /** True when weight_decay was written (keyword or position). */
  weightDecayGiven: boolean;
  decoupled: Value | undefined;
  /** The module whose `.parameters()` is passed as the only group; undefined for groups, lists, filters. */
  paramsOf: Value | undefined;
  paramsExpr: Expr | undefined;
}

export interface Freeze {
  path: string;
  call: Expr;
  key: string;
  value: Value;
  text: string;
}

export interface FrozenUpdating {
  freeze: Freeze;
  point: Site;
}

export interface BareSwitch {
  path: string;
  stmt: Extract<Stmt, { k: 'expr' }>;
  attr: 'eval' | 'train';
  recvText: string;
}

export interface DdpWrap {
  path: string;
  call: CallExpr;
  stmt: Stmt;
  /** The module being wrapped, and whether SyncBatchNorm conversion was applied to it first. */
  inner: ModuleInst | undefined;
  synced: boolean;
  argText: string;
}

interface Summary {
  fn: FuncInfo;
  /** Param-rooted keys the function leaves in a mode (joined over its exits). */
  final: Map<string, Mode>;
  evals: EvalEvent[];
  trains: TrainPoint[];
  /**
   * Loops here that train a parameter again after an eval() inside them, where only the entry mode was train-or-not
   * (`train_model(model, ...)` that never calls `model.train()`): a slip when the caller passes a training module.
   */
  resumes: TrainResume[];
  pairs: PairRefs[];
  forwards: ModuleRef[];
  /** The function (or a callee) runs a backward() or an optimizer step. */
  steps: boolean;
  returns?: { key?: string; mode?: Mode };
}

interface PairRefs {
  model: ModuleRef;
  loader: ModuleRef;
  loop: Site;
  via: Site[];
  mode: Mode;
  partsEval: boolean;
}

interface Alias {
  target: string;
  /** The wrapper class (DDP, DataParallel) when the name holds a wrapped module. */
  wrapper?: string;
}

interface State {
  modes: Map<string, Mode>;
  alias: Map<string, Alias>;
}

const WRAPPERS = new Set(['torch.nn.parallel.DistributedDataParallel', 'torch.nn.DataParallel', 'torch.nn.parallel.DataParallel', 'torch.nn.parallel.data_parallel.DataParallel', 'torch.nn.parallel.distributed.DistributedDataParallel']);
const DDP = new Set(['torch.nn.parallel.DistributedDataParallel', 'torch.nn.parallel.distributed.DistributedDataParallel']);
const SYNC_CONVERT = 'torch.nn.SyncBatchNorm.convert_sync_batchnorm';
const PASS_THROUGH = new Set(['to', 'cuda', 'cpu', 'float', 'double', 'half', 'bfloat16', 'train', 'eval', 'requires_grad_', 'share_memory']);
const LOADERS = new Set(['torch.utils.data.DataLoader', 'torch.utils.data.dataloader.DataLoader']);
const ITER_WRAPPERS = new Set(['builtins.enumerate', 'tqdm.tqdm', 'tqdm.auto.tqdm', 'tqdm.notebook.tqdm', 'builtins.iter']);
const REGION_CTX = new Set(['torch.no_grad', 'torch.inference_mode', 'torch.autograd.no_grad', 'torch.autograd.grad_mode.no_grad', 'torch.autograd.grad_mode.inference_mode']);
/** Trainer-framework hooks that run with the mode already switched by the framework. */
const FRAMEWORK_EVAL_HOOKS = new Set([
  'validation_step', 'test_step', 'predict_step', 'on_validation_epoch_end', 'on_test_epoch_end', 'validation_epoch_end',
  'test_epoch_end', 'on_validation_batch_end', 'on_test_batch_end', 'on_predict_batch_end', 'on_validation_epoch_start', 'on_test_epoch_start',
]);
const LIGHTNING = new Set(['lightning.LightningModule', 'pytorch_lightning.LightningModule', 'lightning.pytorch.LightningModule', 'pytorch_lightning.core.LightningModule', 'pytorch_lightning.core.module.LightningModule']);

const MAX_SUMMARY_DEPTH = 12;
/** A loop over a literal list of at most this many constants is walked once per item (`for phase in ["train", "val"]`). */
const MAX_UNROLL_ITEMS = 8;
/** Statements one walk may visit (loops are re-walked to a fixed point; nesting multiplies the passes). */
const MAX_WALK_STEPS = 100_000;

/** Thrown when a walk runs out of budget: the function then has no summary, which keeps its callers quiet. */
class WalkBudget extends Error {}
/** nn.Module and tensor methods: calling them is not a forward pass. */
const MODULE_METHODS = new Set([
  'parameters', 'named_parameters', 'state_dict', 'load_state_dict', 'to', 'cuda', 'cpu', 'zero_grad', 'apply', 'modules',
  'named_modules', 'children', 'named_children', 'buffers', 'named_buffers', 'register_buffer', 'register_forward_hook',
  'register_forward_pre_hook', 'register_full_backward_hook', 'requires_grad_', 'half', 'float', 'double', 'type', 'share_memory',
  'add_module', 'get_submodule', 'item', 'size', 'backward', 'step', 'numel', 'detach', 'train', 'eval', 'set_epoch', 'save',
]);

/** What dropout/normalization a module value holds, for "does its mode matter" and for messages. */
export interface Caring {
  cares: boolean;
  /** e.g. "1 Dropout, 9 BatchNorm2d"; empty when the layers were not seen. */
  what: string;
  type: string;
  /** Layers seen that drop in training (Dropout family, RNN inter-layer dropout). */
  dropout: boolean;
  /** Layers seen that normalize with batch statistics in training and keep running statistics. */
  batchStats: boolean;
  /**
   * False for a library model known to be built with such layers whose layers the view does not build
   * (`torchvision.models.resnet18()`): messages can say only that it has dropout or normalization.
   */
  seen: boolean;
}

export class TrainingView {
  private readonly summaries = new Map<DefStmt, Summary | null>();
  private readonly walked = new Set<string>();
  readonly evals: EvalEvent[] = [];
  readonly resumes: TrainResume[] = [];
  readonly pairs: Pair[] = [];
  readonly optimizers: OptimizerUse[] = [];
  readonly bare: BareSwitch[] = [];
  readonly ddp: DdpWrap[] = [];
  readonly frozen: FrozenUpdating[] = [];

  constructor(readonly ws: Workspace, readonly interp: Interp) {
    for (const [path, f] of ws.files) {
      const scope = interp.moduleScope(path);
      for (const s of f.facts.ir.body) {
        if (s.k === 'def') this.summary(interp.funcInfo(s, scope, path), 0);
        else if (s.k === 'class') {
          const cls = interp.classInfo(s, scope, path);
          for (const m of s.body) if (m.k === 'def') this.summary(interp.funcInfo(m, scope, path, cls), 0);
        }
      }
      this.walkModule(path);
    }
  }

  private pairsByTrigger: { count: number; by: Map<string, Pair[]> } | undefined;

  /**
   * Pairs whose training is triggered from `path`: the file of the first call on the way to the loop, else the loop's
   * own file; in the order of `pairs`. Indexed once: a filter over every pair for each checked file is quadratic.
   */
  pairsTriggeredIn(path: string): Pair[] {
    if (this.pairsByTrigger?.count !== this.pairs.length) {
      const by = new Map<string, Pair[]>();
      for (const p of this.pairs) {
        const k = p.via[0]?.path ?? p.loop.path;
        const list = by.get(k);
        if (list) list.push(p);
        else by.set(k, [p]);
      }
      this.pairsByTrigger = { count: this.pairs.length, by };
    }
    return this.pairsByTrigger.by.get(path) ?? [];
  }

  private evalFindingsMemo: { events: number; out: (EvalEvent & { caring: Caring })[] } | undefined;

  /** Eval events that end up with a possible train mode on a module whose mode matters. */
  evalFindings(): (EvalEvent & { caring: Caring })[] {
    // asked once per checked file; the same answer while no event was added (per file it was quadratic)
    if (this.evalFindingsMemo?.events === this.evals.length) return this.evalFindingsMemo.out;
    const out: (EvalEvent & { caring: Caring })[] = [];
    const seen = new Set<string>();
    for (const ev of this.evals) {
      if (!ev.mode.t || ev.quiet) continue;
      const caring = this.caring(ev.ref.value);
      if (!caring?.cares) continue;
      const k = `${ev.region.path}\0${ev.region.span.start}\0${ev.ref.text}`;
      if (seen.has(k)) continue;
      seen.add(k);
      out.push({ ...ev, caring });
    }
    this.evalFindingsMemo = { events: this.evals.length, out };
    return out;
  }

  /** Does the module's behaviour differ between train and eval? undefined when the value is not followed. */
  caring(v: Value): Caring | undefined {
    const u = unwrap(v);
    if (u.inst) {
      const counts = new Map<string, number>();
      let dropout = false;
      let batchStats = false;
      let opaque = false;
      for (const m of descendants(u.inst)) {
        const fam = familyOf(m.type);
        const isBn = BATCH_STAT_FAMILIES.has(fam) || (fam === 'instancenorm' && truthy(m.args.get('track_running_stats')) === true);
        const isDrop = DROPOUT_FAMILIES.has(fam) || (fam === 'rnn' && (num(m.args.get('dropout')) ?? 0) > 0 && (num(m.args.get('num_layers')) ?? 1) > 1);
        if (isBn || isDrop) {
          const short = m.type.slice(m.type.lastIndexOf('.') + 1);
          counts.set(short, (counts.get(short) ?? 0) + 1);
        }
        dropout ||= isDrop;
        batchStats ||= isBn;
        // a part the interpreter could not build, or a container with a registration it could not follow
        if (m.kind === 'opaque' || m.incomplete) opaque = true;
      }
      const cares = dropout || batchStats;
      // a part the view cannot see may hold dropout: without one found, the answer is unknown
      if (!cares && opaque) return undefined;
      const what = [...counts].map(([t, n]) => `${n} ${t}`).join(', ');
      return { cares, what, type: shortType(u.inst.type), dropout, batchStats, seen: true };
    }
    if (u.ext && isKnownCaringConstructor(u.ext)) {
      return { cares: true, what: '', type: u.ext.slice(u.ext.lastIndexOf('.') + 1), dropout: false, batchStats: false, seen: false };
    }
    return undefined;
  }

  // ---------- walking ----------

  private summary(fn: FuncInfo, depth: number): Summary | undefined {
    const hit = this.summaries.get(fn.stmt);
    if (hit !== undefined) return hit ?? undefined;
    if (depth > MAX_SUMMARY_DEPTH) return undefined;
    this.summaries.set(fn.stmt, null);
    let s: Summary | undefined;
    try {
      s = new Walker(this, fn.path, fn, depth).run();
    } catch {
      // a function the walker cannot follow has no summary: its callers see no switches from it
      s = undefined;
    }
    this.summaries.set(fn.stmt, s ?? null);
    return s;
  }

  summaryOf(fn: FuncInfo, depth: number): Summary | undefined {
    return this.summary(fn, depth + 1);
  }

  /** Per module-level function: the calls the workspace makes to it, or null when it is also passed as a value. */
  private callSites: Map<DefStmt, CallExpr[] | null> | undefined;

  /**
   * Whether parameter `name` of `fn` has its default on every call: the function is called somewhere (`main()` under
   * `if __name__ == "__main__":`, say), no call passes that parameter, and the function is never handed to something
   * else that could call it with arguments (`fire.Fire(main)`, `mp.spawn(main, ...)`). Decorated functions and
   * methods are left out: a decorator (click, Hydra) or a caller through `self` may supply the value.
   */
  defaultApplies(fn: FuncInfo, name: string): boolean {
    if (fn.owner || fn.stmt.decorators.length) return false;
    const sites = this.sitesOf(fn.stmt);
    if (!sites?.length) return false;
    const params = fn.stmt.params;
    const p = params.find((x) => x.name === name);
    if (!p || (p.kind !== 'normal' && p.kind !== 'kwonly')) return false;
    const pos = p.kind === 'normal' ? params.filter((x) => x.kind === 'normal').indexOf(p) : Infinity;
    return sites.every((c) => !c.args.some((a) => a.k === 'star') && !c.starKwargs.length && c.args.length <= pos && !c.kwargs.some((k) => k.name === name));
  }

  private sitesOf(fn: DefStmt): CallExpr[] | null | undefined {
    if (!this.callSites) {
      const index = new Map<DefStmt, CallExpr[] | null>();
      for (const [path, f] of this.ws.files) {
        const frame: Frame = { scope: this.interp.moduleScope(path), path, body: [], done: false, depth: 0 };
        // only plain and dotted names are resolved (in the file's module scope): evaluating anything else could run code
        const target = (e: Expr): DefStmt | undefined => {
          if (e.k !== 'name' && !(e.k === 'attr' && dottedName(e))) return undefined;
          try {
            const v = this.interp.evalExpr(e, frame);
            return v.t === 'func' && !v.fn.owner ? v.fn.stmt : undefined;
          } catch {
            return undefined;
          }
        };
        for (const c of f.facts.calls) {
          const callee = target(c.call.fn);
          if (callee && index.get(callee) !== null) index.set(callee, [...(index.get(callee) ?? []), c.call]);
          for (const a of [...c.call.args, ...c.call.kwargs.map((k) => k.value)]) {
            const passed = target(a.k === 'star' ? a.value : a);
            if (passed) index.set(passed, null);
          }
        }
      }
      this.callSites = index;
    }
    return this.callSites.get(fn);
  }

  private walkModule(path: string): void {
    if (this.walked.has(path)) return;
    this.walked.add(path);
    try {
      new Walker(this, path, undefined, 0).run();
    } catch {
      // a script the walker cannot follow contributes no events
    }
  }

  /** How a file can name torch.nn for an inserted line: `torch.nn` or `nn`, or undefined when neither is imported. */
  syncPrefix(path: string): string | undefined {
    const scope = this.interp.moduleScope(path);
    const t = this.interp.lookup(scope, 'torch');
    if (t.t === 'ext' && t.q === 'torch') return 'torch.nn';
    const n = this.interp.lookup(scope, 'nn');
    if (n.t === 'ext' && n.q === 'torch.nn') return 'nn';
    return undefined;
  }

  isLightningHook(fn: FuncInfo): boolean {
    if (!fn.owner || !FRAMEWORK_EVAL_HOOKS.has(fn.stmt.name)) return false;
    try {
      return this.interp.externalBases(fn.owner).some((q) => LIGHTNING.has(q));
    } catch {
      return false;
    }
  }
}

/** Unwraps DDP/DataParallel/SyncBatchNorm conversion around a module value. */
export function unwrap(v: Value): { inst?: ModuleInst; ext?: string; wrapper?: 'ddp' | 'dp'; synced: boolean } {
  let cur = v;
  let wrapper: 'ddp' | 'dp' | undefined;
  let synced = false;
  for (let i = 0; i < 8; i++) {
    if (cur.t === 'module') {
      // the interpreter builds `nn.DataParallel(net)` as a layer of its own whose first argument is the model
      if (WRAPPERS.has(cur.m.type)) {
        wrapper ??= DDP.has(cur.m.type) ? 'ddp' : 'dp';
        cur = cur.m.args.get('module') ?? cur.m.args.get('0') ?? UNKNOWN;
        continue;
      }
      return { inst: cur.m, wrapper, synced };
    }
    if (cur.t !== 'obj') return { wrapper, synced };
    if (WRAPPERS.has(cur.q)) {
      wrapper ??= DDP.has(cur.q) ? 'ddp' : 'dp';
      cur = cur.args[0] ?? cur.kwargs.get('module') ?? UNKNOWN;
      continue;
    }
    if (cur.q === SYNC_CONVERT) {
      synced = true;
      cur = cur.args[0] ?? cur.kwargs.get('module') ?? UNKNOWN;
      continue;
    }
    if (cur.q === 'torch.compile') {
      cur = cur.args[0] ?? UNKNOWN;
      continue;
    }
    if (cur.q.endsWith('().to') || cur.q.endsWith('().cuda')) return { wrapper, synced };
    const base = stripPassThrough(cur.q);
    // `resnet18().eval()` is the resnet18 object itself; a wrapper's result loses what it wrapped
    if (base !== cur.q && (WRAPPERS.has(base) || base === SYNC_CONVERT || base === 'torch.compile')) return { wrapper, synced };
    return { ext: base, wrapper, synced };
  }
  return { wrapper, synced };
}

/**
 * The interpreter names the result of calling a method on a library object by appending `().method()` to the object's
 * name (`torchvision.models.resnet18().eval()`); module methods that return the module itself are stripped again.
 */
function stripPassThrough(q: string): string {
  let cur = q;
  for (let i = 0; i < 8 && cur.endsWith('()'); i++) {
    const head = cur.slice(0, -2);
    const dot = head.lastIndexOf('().');
    if (dot < 0 || !PASS_THROUGH.has(head.slice(dot + 3))) break;
    cur = head.slice(0, dot);
  }
  return cur;
}

export function descendants(root: ModuleInst): ModuleInst[] {
  const out: ModuleInst[] = [];
  const seen = new Set<ModuleInst>();
  const stack = [root];
  while (stack.length) {
    const m = stack.pop()!;
    if (seen.has(m)) continue;
    seen.add(m);
    out.push(m);
    // pre-order in registration order, as named_modules() lists them (messages list layers in that order)
    for (let i = m.children.length - 1; i >= 0; i--) stack.push(m.children[i][1]);
  }
  return out;
}

function shortType(t: string): string {
  const i = t.lastIndexOf('::');
  return i >= 0 ? t.slice(i + 2) : t.slice(t.lastIndexOf('.') + 1);
}

/** Walks one function (or a module's top level) in program order with a mode state. */
class Walker {
  private readonly text: string;
  private readonly frame: Frame;
  private readonly params: string[];
  private readonly paramSet: Set<string>;
  /** Names a function binds itself; other names it uses are globals, whose mode is the caller's (like a parameter). */
  private locals: Set<string> | undefined;
  private readonly summaryOut: Summary;
  private readonly loops: Extract<Stmt, { k: 'for' | 'while' }>[] = [];
  /** Per open loop: modules forwarded outside evaluation regions and training steps seen in its body. */
  private readonly loopInfo: { fwd: Map<string, ModuleRef>; trains: number }[] = [];
  private readonly withCopies = new Map<Stmt, Stmt>();
  private readonly executed = new Set<Stmt>();
  private readonly saved = new Map<string, { key: string; mode: Mode }>();
  private readonly lists = new Map<string, Expr[]>();
  private readonly zeroGrad = new Set<string>();
  private readonly freezes: Freeze[] = [];
  private readonly forwarded = new Map<string, ModuleRef>();
  private readonly exits: State[] = [];
  /** Per open loop: the states that leave the body early by `continue` and the loop by `break`. */
  private readonly jumps: { cont: State[]; brk: State[] }[] = [];
  /**
   * Names bound to constants on the current path: targets of loops walked once per literal constant, and names
   * assigned from expressions that fold under those bindings. Any other binding of a name removes it.
   */
  private consts = new Map<string, Value>();
  /**
   * Per loop walked once per constant: the eval origins its entry state already held. Such an origin was set on an
   * earlier pass of an enclosing loop, so that loop, not this one, is the one that trains again.
   */
  private readonly unrolledEntry = new Map<Stmt, Set<string>>();
  private regionDepth = 0;
  private region: { site: Site; insertBefore: Stmt; fixable: boolean } | undefined;
  private state: State | null = { modes: new Map(), alias: new Map() };
  private record = true;
  private steps = 0;
  /** Modules switched in ways the view cannot follow (a loop over `model.modules()`): unknown from then on. */
  private readonly lost = new Set<string>();
  private readonly fnName: string;
  private readonly quietEvals: boolean;

  constructor(private readonly view: TrainingView, private readonly path: string, private readonly fn: FuncInfo | undefined, private readonly depth: number) {
    this.text = view.ws.get(path)?.source.text ?? '';
    const interp = view.interp;
    if (fn) {
      const base: Frame = { scope: fn.scope, path, body: fn.stmt.body, done: false, depth: 0 };
      const scope = interp.bindParams(fn, undefined, [], new Map(), base);
      // parameters are what callers pass: unknown here, except values decorators supply (Hydra configs, click)
      this.params = fn.stmt.params.filter((p) => p.kind === 'normal' || p.kind === 'kwonly').map((p) => p.name);
      // a parameter's own default is only what callers pass when they pass nothing: unknown here, unless every call
      // leaves it out (`def main(cfg_path="configs/train.yaml")` run as `main()`)
      for (const p of fn.stmt.params) if (p.default && !view.defaultApplies(fn, p.name)) scope.vars.set(p.name, UNKNOWN);
      this.frame = { scope, path, body: fn.stmt.body, done: false, depth: 1, cls: fn.owner };
      this.fnName = fn.owner ? `${fn.owner.name}.${fn.stmt.name}` : fn.stmt.name;
      this.quietEvals = view.isLightningHook(fn);
    } else {
      const scope = interp.moduleScope(path);
      this.params = [];
      this.frame = { scope, path, body: view.ws.get(path)?.facts.ir.body ?? [], done: false, depth: 0 };
      this.fnName = posix.basename(path);
      this.quietEvals = false;
    }
    this.paramSet = new Set(this.params);
    if (fn) this.locals = localNames(fn.stmt);
    this.summaryOut = { fn: fn!, final: new Map(), evals: [], trains: [], resumes: [], pairs: [], forwards: [], steps: false };
  }

  run(): Summary {
    const body = this.fn ? this.fn.stmt.body : this.frame.body;
    if (this.fn) {
      const deco = this.fn.stmt.decorators.find((d) => this.isRegionCtx(d));
      if (deco && body.length) {
        const first = body[0].k === 'expr' && body[0].value.k === 'str' && body.length > 1 ? body[1] : body[0];
        this.region = { site: { path: this.path, span: deco.span }, insertBefore: first, fixable: true };
        this.regionDepth++;
      }
    }
    this.execBlock(body);
    if (this.state) this.exits.push(this.state);
    const exit = this.joinStates(this.exits);
    if (exit) {
      for (const [k, m] of exit.modes) if (this.isEntry(root(k))) this.summaryOut.final.set(k, m);
    }
    return this.summaryOut;
  }

  // ---------- state ----------

  /** A key root whose mode at entry is whatever the caller had: a parameter, or a global the function reads. */
  private isEntry(name: string): boolean {
    if (this.paramSet.has(name)) return true;
    return !!this.locals && !this.locals.has(name) && !name.startsWith('%');
  }

  private resolve(key: string, st: State | null = this.state): string {
    if (!st) return key;
    const parts = key.split('.');
    for (let i = 0; i < 8; i++) {
      const a = st.alias.get(parts[0]);
      if (!a || a.target === parts[0]) {
        if (a?.wrapper && parts[1] === 'module') parts.splice(1, 1);
        break;
      }
      const t = a.target.split('.');
      const rest = parts.slice(1);
      if (a.wrapper && rest[0] === 'module') rest.shift();
      parts.splice(0, parts.length, ...t, ...rest);
    }
    return parts.join('.');
  }

  private read(key: string, st: State | null = this.state): Mode {
    if (!st) return UNKNOWN_MODE;
    for (const l of this.lost) if (key === l || key.startsWith(`${l}.`)) return UNKNOWN_MODE;
    for (let k = key; ; ) {
      const m = st.modes.get(k);
      if (m) return m;
      const i = k.lastIndexOf('.');
      if (i < 0) break;
      k = k.slice(0, i);
    }
    return this.isEntry(root(key)) ? ENTRY : UNKNOWN_MODE;
  }

  private set(key: string, m: Mode): void {
    if (!this.state) return;
    for (const l of [...this.lost]) if (l === key || l.startsWith(`${key}.`)) this.lost.delete(l);
    for (const k of [...this.state.modes.keys()]) if (k.startsWith(`${key}.`)) this.state.modes.delete(k);
    this.state.modes.set(key, m);
  }

  private clone(st: State | null): State | null {
    return st ? { modes: new Map(st.modes), alias: new Map(st.alias) } : null;
  }

  private joinStates(states: (State | null)[]): State | null {
    const live = states.filter((s): s is State => !!s);
    if (!live.length) return null;
    if (live.length === 1) return this.clone(live[0]);
    const keys = new Set(live.flatMap((s) => [...s.modes.keys()]));
    const modes = new Map<string, Mode>();
    for (const k of keys) modes.set(k, live.map((s) => this.read(k, s)).reduce(joinMode));
    const alias = new Map<string, Alias>();
    for (const [k, a] of live[0].alias) if (live.every((s) => s.alias.get(k)?.target === a.target)) alias.set(k, a);
    return { modes, alias };
  }

  private sameState(a: State | null, b: State | null): boolean {
    if (!a || !b) return a === b;
    const keys = new Set([...a.modes.keys(), ...b.modes.keys()]);
    for (const k of keys) if (!sameMode(this.read(k, a), this.read(k, b))) return false;
    return true;
  }

  // ---------- statements ----------

  private execBlock(stmts: readonly Stmt[]): void {
    for (const s of stmts) {
      if (!this.state) return;
      this.execStmt(s);
    }
  }

  private interpExec(s: Stmt): void {
    if (this.executed.has(s)) return;
    this.executed.add(s);
    try {
      this.view.interp.execStmt(s, this.frame);
      this.frame.done = false;
      this.frame.returned = undefined;
    } catch {
      // values the interpreter cannot follow stay unknown
    }
  }

  private execStmt(s: Stmt): void {
    if (++this.steps > MAX_WALK_STEPS) throw new WalkBudget('training view: walk budget exhausted');
    switch (s.k) {
      case 'expr':
        this.bareSwitch(s);
        this.visit(s.value, s);
        this.interpExec(s);
        return;
      case 'assign': {
        this.visit(s.value, s);
        if (s.value.k === 'list' || s.value.k === 'tuple') for (const t of s.targets) if (t.k === 'name') this.lists.set(t.id, s.value.items);
        this.savedTraining(s);
        const cls = this.classify(s.value);
        this.interpExec(s);
        // `is_train = phase == "train"`: only values derived from the loop constants are bound (never plain literals,
        // which a called function could rebind through `global`)
        const folded = this.readsConst(s.value) ? this.fold(s.value) : undefined;
        for (const t of s.targets) this.kill(targetNames(t));
        if (folded && s.targets.length === 1 && s.targets[0].k === 'name') this.consts.set(s.targets[0].id, folded);
        for (const t of s.targets) {
          // `a, b = Net(), Net()`: each name gets its own item
          const v = s.value;
          if ((t.k === 'tuple' || t.k === 'list') && (v.k === 'tuple' || v.k === 'list') && t.items.length === v.items.length) {
            const vals = v.items;
            t.items.forEach((ti, i) => this.bind(ti, this.classify(vals[i])));
          } else if (t.k === 'tuple' || t.k === 'list') for (const n of targetNames(t)) this.bind({ k: 'name', id: n, span: t.span }, {});
          else this.bind(t, cls);
        }
        return;
      }
      case 'augassign':
        this.visit(s.value, s);
        this.interpExec(s);
        this.kill(targetNames(s.target));
        return;
      case 'return': {
        if (s.value) {
          this.visit(s.value, s);
          const c = this.classify(s.value);
          const key = c.key ? this.resolve(c.key) : undefined;
          const ret = key && this.isEntry(root(key)) ? { key } : key ? { mode: this.read(key) } : c.fresh ? { mode: c.fresh } : undefined;
          if (ret && this.record) this.summaryOut.returns = this.summaryOut.returns ?? ret;
        }
        if (this.state) this.exits.push(this.state);
        this.state = null;
        return;
      }
      case 'if': {
        this.visit(s.test, s);
        // a test that folds under the constants bound on this path (`phase == "train"` in a loop over phases) takes one branch
        const taken = truthy(this.fold(s.test));
        if (taken !== undefined) {
          this.execBlock(taken ? s.body : s.orelse);
          return;
        }
        const before = this.clone(this.state);
        const consts = new Map(this.consts);
        this.execBlock(s.body);
        const a = this.state;
        const aConsts = this.consts;
        this.state = before;
        this.consts = consts;
        this.execBlock(s.orelse);
        this.state = this.joinStates([a, this.state]);
        for (const [k, v] of this.consts) if (!sameConst(aConsts.get(k), v)) this.consts.delete(k);
        return;
      }
      case 'for': case 'while': {
        if (s.k === 'for') this.visit(s.iter, s);
        if (s.k === 'for') this.parameterLoopFreeze(s);
        else this.visit(s.test, s);
        const items = s.k === 'for' ? this.constItems(s) : undefined;
        if (s.k === 'for' && !items) this.bindTarget(s.target, UNKNOWN);
        this.kill(boundNames(s.body));
        if (s.k === 'for') this.kill(targetNames(s.target));
        this.loop(s, items);
        this.kill(boundNames(s.body));
        if (s.k === 'for') this.kill(targetNames(s.target));
        return;
      }
      case 'with': {
        let isRegion = false;
        for (const it of s.items) {
          this.visit(it.ctx, s);
          if (this.isRegionCtx(it.ctx)) {
            isRegion = true;
            if (!this.regionDepth) this.region = { site: { path: this.path, span: it.ctx.span }, insertBefore: s, fixable: !this.foldedRegion(it.ctx) };
          }
        }
        let copy = this.withCopies.get(s);
        if (!copy) this.withCopies.set(s, (copy = { ...s, body: [] } as Stmt));
        this.interpExec(copy);
        for (const it of s.items) if (it.target) this.kill(targetNames(it.target));
        if (isRegion) this.regionDepth++;
        this.execBlock(s.body);
        if (isRegion) {
          this.regionDepth--;
          if (!this.regionDepth) this.region = undefined;
        }
        return;
      }
      case 'try': {
        // a handler may start anywhere in the body: no constant bound in the statement survives it
        this.kill(boundNames([s]));
        const start = this.clone(this.state);
        this.execBlock(s.body);
        const afterBody = this.state;
        const ends: (State | null)[] = [];
        this.execBlock(s.orelse);
        ends.push(this.state);
        for (const h of s.handlers) {
          this.state = this.joinStates([start, afterBody]);
          this.execBlock(h);
          ends.push(this.state);
        }
        this.state = this.joinStates(ends);
        this.kill(boundNames([s]));
        this.execBlock(s.finalbody);
        return;
      }
      case 'def': case 'class': case 'import': case 'from':
        this.interpExec(s);
        this.kill(boundNames([s]));
        return;
      case 'break': case 'continue': {
        // the rest of the block is not reached on this path; the loop picks the state up where the jump lands
        const j = this.jumps[this.jumps.length - 1];
        if (!j || !this.state) return;
        (s.k === 'break' ? j.brk : j.cont).push(this.state);
        this.state = null;
        return;
      }
      default:
        return;
    }
  }

  private loop(s: Extract<Stmt, { k: 'for' | 'while' }>, items?: Value[]): void {
    this.loops.push(s);
    const info = { fwd: new Map<string, ModuleRef>(), trains: 0 };
    this.loopInfo.push(info);
    const entry = this.clone(this.state);
    const consts = this.consts;
    const jumps = { cont: [] as State[], brk: [] as State[] };
    this.jumps.push(jumps);
    /** Walks the body once from `from`; the end state joins the paths that continued. */
    const pass = (from: State | null): State | null => {
      this.state = from;
      this.consts = new Map(consts);
      jumps.cont = [];
      this.execBlock(s.body);
      return this.joinStates([this.state, ...jumps.cont]);
    };
    let cur = this.clone(entry);
    let end: State | null = null;
    let exit: State | null;
    if (s.k === 'for' && items) {
      // a loop over literal constants runs its body once per item, in order, with the target bound to that item
      const held = new Set<string>();
      for (const m of entry?.modes.values() ?? []) for (const o of m.e) held.add(originKey(o));
      this.unrolledEntry.set(s, held);
      end = cur;
      for (const item of items) {
        // every path broke out or returned: the later items are not reached
        if (!end) break;
        this.bindTarget(s.target, item);
        consts.set((s.target as Extract<Expr, { k: 'name' }>).id, item);
        end = pass(end);
        consts.delete((s.target as Extract<Expr, { k: 'name' }>).id);
      }
      this.bindTarget(s.target, UNKNOWN);
      exit = this.joinStates([end, ...jumps.brk]);
    } else {
      // a loop body runs again: what it sets at its end is the mode at its start on the next pass
      const wasRecording = this.record;
      for (let p = 0; p < 3; p++) {
        this.record = false;
        end = pass(cur);
        const next = this.joinStates([entry, end]);
        if (this.sameState(next, cur)) break;
        cur = next;
      }
      // the final pass, from the fixed point, records events (the passes before it saw the same breaks)
      this.record = wasRecording;
      jumps.brk = [];
      end = pass(cur);
      // a loop known to run at least once leaves its end state; otherwise skipping it is a path too
      exit = this.joinStates(s.k === 'for' && this.nonEmpty(s.iter) ? [end, ...jumps.brk] : [entry, end, ...jumps.brk]);
    }
    this.state = exit;
    this.consts = consts;
    this.jumps.pop();
    this.loops.pop();
    this.loopInfo.pop();
    this.execBlock(s.orelse);
    if (s.k === 'for' && info.trains > 0) this.pairLoop(s, info.fwd, cur, end);
  }

  /** The items of `for NAME in [c1, c2, ...]` when all are constants (a handful at most). */
  private constItems(s: Extract<Stmt, { k: 'for' }>): Value[] | undefined {
    const it = s.iter;
    if (s.target.k !== 'name' || (it.k !== 'list' && it.k !== 'tuple') || !it.items.length || it.items.length > MAX_UNROLL_ITEMS) return undefined;
    const out: Value[] = [];
    for (const x of it.items) {
      const v = x.k === 'str' || x.k === 'num' || x.k === 'bool' || x.k === 'none' || x.k === 'unary' ? this.fold(x) : undefined;
      if (!v) return undefined;
      out.push(v);
    }
    return out;
  }

  private bindTarget(t: Expr, v: Value): void {
    try {
      this.view.interp.assign(t, v, this.frame);
    } catch {
      // a target the interpreter cannot bind stays as it was
    }
  }

  private readsConst(e: Expr): boolean {
    if (!this.consts.size) return false;
    if (e.k === 'name') return this.consts.has(e.id);
    return exprChildren(e).some((c) => this.readsConst(c));
  }

  private kill(names: Iterable<string>): void {
    for (const n of names) this.consts.delete(n);
  }

  /**
   * The constant an expression folds to when its names are only the constants bound on this path (others unknown),
   * through the interpreter's own folding of comparisons, `and`/`or`/`not` and arithmetic. Expressions that call,
   * loop or bind are not folded: evaluating them could run user code or change the interpreter's state.
   */
  private fold(e: Expr): Value | undefined {
    const names = new Set<string>();
    let ok = true;
    const scan = (x: Expr): void => {
      if (!ok) return;
      if (x.k === 'call' || x.k === 'comp' || x.k === 'lambda' || x.k === 'walrus' || x.k === 'unknown' || (x.k === 'str' && x.fstring)) {
        ok = false;
        return;
      }
      if (x.k === 'name') names.add(x.id);
      for (const c of exprChildren(x)) scan(c);
    };
    scan(e);
    if (!ok) return undefined;
    const vars = new Map<string, Value>();
    for (const n of names) vars.set(n, this.consts.get(n) ?? UNKNOWN);
    try {
      const v = this.view.interp.evalExpr(e, { scope: { path: this.path, vars, parent: null }, path: this.path, body: [], done: false, depth: 0 });
      return v.t === 'str' || v.t === 'num' || v.t === 'bool' || v.t === 'none' ? v : undefined;
    } catch {
      return undefined;
    }
  }

  /** `for x, y in loader:` whose body forwards a module and steps: the loader feeds that module's training. */
  private pairLoop(s: Extract<Stmt, { k: 'for' }>, fwd: Map<string, ModuleRef>, head: State | null, end: State | null): void {
    if (!this.record) return;
    let it = s.iter;
    for (let i = 0; i < 3 && it.k === 'call'; i++) {
      const callee = this.value(it.fn);
      if (callee.t === 'ext' && ITER_WRAPPERS.has(callee.q) && it.args[0]) it = it.args[0];
      else break;
    }
    const lkey = this.keyOf(it);
    // `for x, y in DataLoader(ds, batch_size=2):` has no name: key it by its position
    const loader: ModuleRef = { key: lkey ? this.resolve(lkey) : `%${it.span.start}`, text: this.src(it.span), value: this.value(it) };
    const site: Site = { path: this.path, span: s.iter.span };
    for (const ref of fwd.values()) {
      const mode = joinMode(this.read(ref.key, head), this.read(ref.key, end));
      this.emitPair({ model: ref, loader, loop: site, via: [], mode, partsEval: this.partsEval(ref.key, head) || this.partsEval(ref.key, end) });
    }
  }

  /** Some part below `key` is in eval (or lost): its BatchNorm may be frozen on purpose. */
  private partsEval(key: string, st: State | null): boolean {
    if (!st) return false;
    for (const [k, m] of st.modes) if (k.startsWith(`${key}.`) && (m.e.length || m.u)) return true;
    for (const l of this.lost) if (l === key || l.startsWith(`${key}.`)) return true;
    return false;
  }

  private emitPair(p: PairRefs): void {
    if (this.isEntry(root(p.loader.key)) || this.isEntry(root(p.model.key))) this.summaryOut.pairs.push(p);
    if (isLoader(p.loader.value) && p.model.value.t !== 'unknown') {
      this.view.pairs.push({ model: p.model.value, loader: p.loader.value, loop: p.loop, via: p.via, mode: p.mode, partsEval: p.partsEval });
    }
  }

  // ---------- expressions ----------

  /** Visits calls in evaluation order (arguments before the call). */
  private visit(e: Expr, stmt: Stmt): void {
    if (e.k === 'lambda') return;
    for (const c of exprChildren(e)) this.visit(c, stmt);
    if (e.k === 'call') this.onCall(e, stmt);
    if (e.k === 'walrus') this.consts.delete(e.target);
  }

  private onCall(c: CallExpr, stmt: Stmt): void {
    if (!this.state) return;
    const fn = c.fn;
    if (fn.k === 'attr') {
      const recvKey = this.keyOf(fn.obj);
      const attr = fn.attr;
      if (recvKey && (attr === 'eval' || attr === 'train') && this.modeSwitchArgsOk(c, attr)) {
        if (this.loopVarSwitch(c, attr, recvKey)) return;
        const key = this.resolve(recvKey);
        this.set(key, this.switchMode(c, attr, key));
        return;
      }
      if (attr === 'requires_grad_' && recvKey) {
        const a = c.args[0] ?? c.kwargs.find((k) => k.name === 'requires_grad')?.value;
        if (a && a.k === 'bool' && !a.value) this.freeze(c, recvKey, fn.obj);
        return;
      }
      if (attr === 'zero_grad' && recvKey) this.zeroGrad.add(this.resolve(recvKey));
      if (attr === 'backward' || (attr === 'step' && this.isOptimizerStep(fn.obj, recvKey))) {
        this.trainPoint(c, c.span, { path: this.path, span: c.span }, this.src(c.span));
        return;
      }
    }
    const callee = this.value(fn);
    if (callee.t === 'func') {
      this.callUser(c, callee.fn, callee.self, fn);
      return;
    }
    if (callee.t === 'ext' || callee.t === 'class' || callee.t === 'partial') {
      if (callee.t === 'ext') this.onExternal(c, callee.q, stmt);
      return;
    }
    // a module called: its forward
    const key = this.keyOf(fn);
    if (!key) return;
    if (fn.k === 'attr' && MODULE_METHODS.has(fn.attr)) return;
    const rkey = this.resolve(key);
    let v: Value = callee;
    const follows = (x: Value) => {
      const u = unwrap(x);
      return !!u.inst || (!!u.ext && isKnownCaringConstructor(u.ext));
    };
    if (!follows(v)) {
      // the interpreter may have lost the module behind `.to(device)` of a wrapped value: ask the alias target
      const rv = this.refValue(rkey, key);
      if (rv && follows(rv)) v = rv;
    }
    const tracked = follows(v) || (v.t === 'unknown' && (this.state.modes.has(rkey) || this.isEntry(root(rkey))));
    if (!tracked) return;
    const ref: ModuleRef = { key: rkey, text: this.src(fn.span), value: v };
    this.forward(ref);
  }

  private forward(ref: ModuleRef): void {
    if (this.regionDepth && this.region) {
      if (!this.record) return;
      const ev: EvalEvent = {
        ref, mode: this.read(ref.key), region: this.region.site, insertBefore: this.region.insertBefore, insertPath: this.path,
        fnName: this.fnName, via: [], quiet: this.quietEvals, fixable: this.region.fixable,
      };
      this.emitEval(ev);
    } else {
      if (!this.forwarded.has(ref.key)) this.forwarded.set(ref.key, ref);
      for (const l of this.loopInfo) if (!l.fwd.has(ref.key)) l.fwd.set(ref.key, ref);
      if (this.record && this.isEntry(root(ref.key)) && !this.summaryOut.forwards.some((f) => f.key === ref.key)) this.summaryOut.forwards.push(ref);
    }
  }

  private emitEval(ev: EvalEvent): void {
    if (ev.mode.n && this.isEntry(root(ev.ref.key))) this.summaryOut.evals.push(ev);
    this.view.evals.push(ev);
  }

  private trainPoint(_c: CallExpr, local: Span, report: Site, reportText: string): void {
    this.stepped();
    for (const ref of this.forwarded.values()) {
      const tp: TrainPoint = { ref, mode: this.read(ref.key), local, report, reportText };
      this.onTrainPoint(tp);
    }
    this.checkFrozen(report);
  }

  private stepped(): void {
    this.summaryOut.steps = true;
    for (const l of this.loopInfo) l.trains++;
  }

  private onTrainPoint(tp: TrainPoint): void {
    if (!this.record) return;
    // a module set to eval on every path (a frozen teacher, say) is deliberate; the slip is train on one pass, eval on the next
    const entry = tp.mode.n && this.isEntry(root(tp.ref.key));
    if (entry) this.summaryOut.trains.push(tp);
    if (!tp.mode.t && !entry) return;
    for (const o of tp.mode.e) {
      const loop = [...this.loops].reverse().find((l) => l.span.start <= o.local.start && o.local.end <= l.span.end && !this.unrolledEntry.get(l)?.has(originKey(o)));
      if (!loop) continue;
      const r: TrainResume = { origin: o, point: tp, loop, path: this.path, text: tp.ref.text, fnName: this.fnName };
      // train on the first pass only if the caller passed a training module: its callers decide
      if (tp.mode.t) this.view.resumes.push(r);
      else this.summaryOut.resumes.push(r);
    }
  }

  private checkFrozen(point: Site): void {
    if (!this.record) return;
    for (const f of this.freezes) {
      const m = this.read(this.resolve(f.key));
      if (m.t) this.view.frozen.push({ freeze: f, point });
    }
  }

  private freeze(c: Expr, recvKey: string, recv: Expr): void {
    if (!this.record) return;
    const targets = this.lists.get(recvKey);
    // `for part in frozen: part.requires_grad_(False)` with `frozen = [a.b, a.c]`
    const loopVar = this.loops.length ? this.loopListItems(recvKey) : undefined;
    const exprs = loopVar ?? (targets ? undefined : [recv]);
    for (const e of exprs ?? []) {
      const k = this.keyOf(e);
      if (!k) continue;
      if (this.freezes.some((f) => f.key === k && f.call === c)) continue;
      this.freezes.push({ path: this.path, call: c, key: k, value: this.value(e), text: this.src(e.span) });
    }
  }

  /**
   * A switch on the target of an enclosing `for`: over a list of module expressions it switches each of them;
   * over anything else (`model.modules()`, an unknown list) the modules named in the loop's iterable become unknown.
   */
  private loopVarSwitch(c: CallExpr, attr: 'eval' | 'train', recvKey: string): boolean {
    const name = root(recvKey);
    const loop = [...this.loops].reverse().find((l) => l.k === 'for' && targetNames(l.target).includes(name));
    if (!loop || loop.k !== 'for') return false;
    const rest = recvKey.slice(name.length);
    const items = loop.target.k === 'name' ? this.loopListItems(name, loop) : undefined;
    if (items && !rest) {
      for (const e of items) {
        const k = this.keyOf(e);
        if (!k) continue;
        const key = this.resolve(k);
        this.set(key, this.switchMode(c, attr, key));
      }
      return true;
    }
    const seen = new Set<string>();
    const mark = (e: Expr): void => {
      const k = e.k === 'name' || e.k === 'attr' ? dottedName(e) : null;
      if (k) {
        seen.add(this.resolve(k));
        return;
      }
      for (const x of exprChildren(e)) mark(x);
    };
    mark(loop.iter);
    for (const k of seen) {
      this.set(k, UNKNOWN_MODE);
      this.lost.add(k);
      // `model.modules()` → the receiver `model`
      const i = k.lastIndexOf('.');
      if (i > 0) {
        this.set(k.slice(0, i), UNKNOWN_MODE);
        this.lost.add(k.slice(0, i));
      }
    }
    return true;
  }

  private nonEmpty(it: Expr): boolean {
    if ((it.k === 'list' || it.k === 'tuple') && it.items.length && !it.items.some((x) => x.k === 'star')) return true;
    if (it.k === 'name' && (this.lists.get(it.id)?.length ?? 0) > 0) return true;
    if (it.k === 'call' && it.fn.k === 'attr' && ['modules', 'named_modules', 'parameters', 'named_parameters'].includes(it.fn.attr)) return true;
    if (it.k === 'call') {
      const callee = this.value(it.fn);
      if (callee.t === 'ext' && (callee.q === 'builtins.range' || callee.q === 'builtins.enumerate')) {
        try {
          const v = this.view.interp.evalExpr(it, { ...this.frame, done: false });
          return v.t === 'list' && v.items.length > 0;
        } catch {
          return false;
        }
      }
    }
    return false;
  }

  /** `for p in X.parameters(): p.requires_grad = False` freezes X. */
  private parameterLoopFreeze(s: Extract<Stmt, { k: 'for' }>): void {
    const it = s.iter;
    if (s.target.k !== 'name' || it.k !== 'call' || it.fn.k !== 'attr' || it.fn.attr !== 'parameters') return;
    const target = s.target.id;
    const freezes = s.body.some((b) => b.k === 'assign' && b.value.k === 'bool' && !b.value.value &&
      b.targets.some((t) => t.k === 'attr' && t.attr === 'requires_grad' && t.obj.k === 'name' && t.obj.id === target));
    const k = this.keyOf(it.fn.obj);
    if (freezes && k) this.freeze(it, k, it.fn.obj);
  }

  private loopListItems(name: string, loop?: Extract<Stmt, { k: 'for' | 'while' }>): Expr[] | undefined {
    const l = loop ?? this.loops[this.loops.length - 1];
    if (l.k !== 'for' || l.target.k !== 'name' || l.target.id !== name) return undefined;
    if (l.iter.k === 'name') return this.lists.get(l.iter.id);
    if (l.iter.k === 'list' || l.iter.k === 'tuple') return l.iter.items;
    return undefined;
  }

  private switchMode(c: CallExpr, attr: 'eval' | 'train', key: string): Mode {
    const evalMode = (): Mode => ({ t: false, n: false, u: false, e: [{ report: { path: this.path, span: c.span }, text: this.src(c.span), fn: this.fnName, local: c.span }] });
    if (attr === 'eval') return evalMode();
    const a = c.args[0] ?? c.kwargs.find((k) => k.name === 'mode')?.value;
    if (!a) return TRAIN;
    if (a.k === 'bool') return a.value ? TRAIN : evalMode();
    if (a.k === 'name') {
      const sv = this.saved.get(a.id);
      if (sv && sv.key === key) return sv.mode;
    }
    // `model.train(phase == "train")` on a pass with the phase bound
    const v = this.fold(a) ?? this.value(a);
    if (v.t === 'bool') return v.v ? TRAIN : evalMode();
    return UNKNOWN_MODE;
  }

  private modeSwitchArgsOk(c: CallExpr, attr: string): boolean {
    if (attr === 'eval') return c.args.length === 0 && c.kwargs.length === 0;
    return c.args.length + c.kwargs.length <= 1;
  }

  /** `was = model.training` remembers the mode for `model.train(was)`. */
  private savedTraining(s: Extract<Stmt, { k: 'assign' }>): void {
    if (s.value.k !== 'attr' || s.value.attr !== 'training') return;
    const k = this.keyOf(s.value.obj);
    if (!k) return;
    const key = this.resolve(k);
    for (const t of s.targets) if (t.k === 'name') this.saved.set(t.id, { key, mode: this.read(key) });
  }

  private isOptimizerStep(recv: Expr, recvKey: string | null): boolean {
    const v = this.value(recv);
    if (v.t === 'obj') {
      if (v.q.startsWith('torch.optim.') && !v.q.includes('lr_scheduler')) return true;
      if (/GradScaler/.test(v.q)) return true;
      if (v.q.startsWith('torch.')) return false;
    }
    return !!recvKey && v.t === 'unknown' && this.zeroGrad.has(this.resolve(recvKey));
  }

  private onExternal(c: CallExpr, q: string, stmt: Stmt): void {
    if (q.startsWith('torch.optim.') && /^torch\.optim\.[A-Z]\w*$/.test(q) && this.record) this.optimizer(c, q);
    if (DDP.has(q) && this.record) {
      const a = c.args[0] ?? c.kwargs.find((k) => k.name === 'module')?.value;
      if (a) {
        const u = unwrap(this.value(a));
        this.view.ddp.push({ path: this.path, call: c, stmt, inner: u.inst, synced: u.synced, argText: this.src(a.span) });
      }
    }
  }

  private optimizer(c: CallExpr, q: string): void {
    const wdKw = c.kwargs.find((k) => k.name === 'weight_decay');
    const wdExpr = wdKw?.value ?? c.args[4];
    const def = q === 'torch.optim.AdamW' ? 0.01 : 0;
    const weightDecay = wdExpr ? this.value(wdExpr) : { t: 'num' as const, v: def };
    const dec = c.kwargs.find((k) => k.name === 'decoupled_weight_decay');
    const p = c.args[0] ?? c.kwargs.find((k) => k.name === 'params')?.value;
    let paramsOf: Value | undefined;
    if (p && p.k === 'call' && p.fn.k === 'attr' && p.fn.attr === 'parameters' && p.args.length === 0) paramsOf = this.value(p.fn.obj);
    this.view.optimizers.push({
      path: this.path, call: c, type: q, weightDecay, weightDecayGiven: !!wdExpr, decoupled: dec ? this.value(dec.value) : undefined, paramsOf, paramsExpr: p,
    });
  }

  private callUser(c: CallExpr, fn: FuncInfo, self: Value | undefined, fnExpr: Expr): void {
    const sum = this.view.summaryOf(fn, this.depth);
    if (!sum || !this.state) return;
    // map callee parameters to caller expressions
    const names = fn.stmt.params.filter((p) => p.kind === 'normal' || p.kind === 'kwonly').map((p) => p.name);
    const argOf = new Map<string, Expr>();
    let pos = 0;
    const isStatic = fn.stmt.decorators.some((d) => d.k === 'name' && d.id === 'staticmethod');
    if (self && !isStatic && fnExpr.k === 'attr') argOf.set(names[pos++], fnExpr.obj);
    for (const a of c.args) {
      if (a.k === 'star') break;
      const n = names[pos++];
      if (n) argOf.set(n, a);
    }
    for (const k of c.kwargs) argOf.set(k.name, k.value);
    const callSite: Site = { path: this.path, span: c.span };
    const mapKey = (key: string): { key: string; text: string; value: Value } | undefined => {
      const r = root(key);
      const a = argOf.get(r);
      if (!a) {
        // a global the callee reads is the same name here when both live in one file
        if (names.includes(r) || fn.path !== this.path || r.startsWith('%') || this.locals?.has(r)) return undefined;
        const rk = this.resolve(key);
        return { key: rk, text: key, value: this.refValue(rk, key) ?? UNKNOWN };
      }
      const rest = key.slice(r.length);
      const ak = this.keyOf(a) ?? this.synthKey(a);
      let value = this.value(a);
      for (const seg of rest.split('.').filter(Boolean)) value = this.view.interp.getAttr(value, seg, this.frame);
      return { key: this.resolve(ak + rest), text: this.src(a.span) + rest, value };
    };
    // evaluation regions in the callee whose mode is the caller's
    for (const ev of sum.evals) {
      const m = mapKey(ev.ref.key);
      if (!m || !this.record) continue;
      const mode = substMode(ev.mode, this.read(m.key), c.span);
      this.emitEval({ ...ev, ref: { key: m.key, text: ev.ref.text, value: m.value }, mode, via: [callSite, ...ev.via] });
    }
    // forwards in the callee count as forwards here (a training step here trains them)
    for (const f of sum.forwards) {
      const m = mapKey(f.key);
      if (m) this.forward({ key: m.key, text: m.text, value: m.value });
    }
    // training steps in the callee that run in the caller's mode
    let trained = false;
    for (const tp of sum.trains) {
      const m = mapKey(tp.ref.key);
      if (!m) continue;
      trained = true;
      this.onTrainPoint({ ref: { key: m.key, text: m.text, value: m.value }, mode: substMode(tp.mode, this.read(m.key), c.span), local: c.span, report: tp.report, reportText: tp.reportText });
    }
    if (sum.steps) this.stepped();
    // loops in the callee that resume training after eval(), when the module arrives here in training mode
    for (const r of sum.resumes) {
      const m = mapKey(r.point.ref.key);
      if (!m || !this.record) continue;
      const mode = substMode(r.point.mode, this.read(m.key), c.span);
      const point: TrainPoint = { ...r.point, ref: { key: m.key, text: r.point.ref.text, value: m.value }, mode };
      if (mode.t) this.view.resumes.push({ ...r, point });
      else if (mode.n && this.isEntry(root(m.key))) this.summaryOut.resumes.push({ ...r, point });
    }
    // loaders the callee trains a module with
    for (const p of sum.pairs) {
      const mm = mapKey(p.model.key);
      const ml = mapKey(p.loader.key);
      const model = mm ? { key: mm.key, text: mm.text, value: mm.value } : p.model;
      const loader = ml ? { key: ml.key, text: ml.text, value: ml.value } : p.loader;
      const mode = mm ? substMode(p.mode, this.read(mm.key), c.span) : p.mode;
      const partsEval = p.partsEval || (!!mm && p.mode.n && this.partsEval(mm.key, this.state));
      if (this.record) this.emitPair({ model, loader, loop: p.loop, via: [callSite, ...p.via], mode, partsEval });
    }
    // the callee's final modes flow back (shorter keys first: a parent's switch covers its children)
    const finals = [...sum.final].sort((a, b) => a[0].length - b[0].length);
    for (const [k, fm] of finals) {
      const m = mapKey(k);
      if (!m) continue;
      this.set(m.key, substMode(fm, this.read(m.key), c.span));
    }
    if (trained || sum.steps) this.checkFrozen(callSite);
    this.lastReturn = sum.returns ? { sum: sum.returns, mapKey, span: c.span } : undefined;
  }

  private lastReturn: { sum: NonNullable<Summary['returns']>; mapKey: (k: string) => { key: string } | undefined; span: Span } | undefined;

  /** The value a canonical key names, wrapped again when the written name held a DDP/DataParallel wrapper. */
  private refValue(rkey: string, written: string): Value | undefined {
    if (rkey.startsWith('%')) return undefined;
    const parts = rkey.split('.');
    try {
      let v = this.view.interp.lookup(this.frame.scope, parts[0]);
      for (const seg of parts.slice(1)) v = this.view.interp.getAttr(v, seg, this.frame);
      if (v.t === 'unknown') return undefined;
      const w = this.state?.alias.get(root(written))?.wrapper;
      return w ? { t: 'obj', q: w, args: [v], kwargs: new Map(), state: new Map() } : v;
    } catch {
      return undefined;
    }
  }

  private synthKey(e: Expr): string {
    const k = `%${e.span.start}`;
    if (this.state && !this.state.modes.has(k)) this.state.modes.set(k, this.isConstruction(e) ? TRAIN : UNKNOWN_MODE);
    return k;
  }

  // ---------- assignments ----------

  /** What an assigned expression is, for modes: an alias of a tracked module, a fresh module, or unknown. */
  private classify(e: Expr): { key?: string; wrapper?: string; fresh?: Mode } {
    const k = this.keyOf(e);
    if (k) return { key: k };
    if (e.k !== 'call') return {};
    // `models.resnet18(...).eval().to(device)`: what the base builds, in the mode the chain's last switch sets
    let base: Expr = e;
    while (base.k === 'call' && base.fn.k === 'attr' && PASS_THROUGH.has(base.fn.attr)) base = base.fn.obj;
    if (base !== e) {
      const inner = this.classify(base);
      const sw = this.chainSwitch(e);
      return inner.key || !sw ? inner : { ...inner, fresh: sw };
    }
    const callee = this.value(e.fn);
    if (callee.t === 'ext' && (WRAPPERS.has(callee.q) || callee.q === SYNC_CONVERT || callee.q === 'torch.compile')) {
      const a = e.args[0];
      if (!a) return {};
      const inner = this.classify(a);
      return { ...inner, wrapper: WRAPPERS.has(callee.q) ? callee.q : inner.wrapper };
    }
    if (callee.t === 'func') {
      const r = this.lastReturn;
      this.lastReturn = undefined;
      if (r && r.span.start === e.span.start) {
        if (r.sum.key) {
          const m = r.mapKey(r.sum.key);
          if (m) return { key: m.key };
        }
        if (r.sum.mode) return { fresh: substMode(r.sum.mode, UNKNOWN_MODE, e.span) };
      }
      return {};
    }
    if (this.isConstruction(e)) return { fresh: TRAIN };
    return {};
  }

  /** The mode the outermost `.eval()` / `.train(...)` of a pass-through chain sets, if it has one. */
  private chainSwitch(e: Expr): Mode | undefined {
    for (let cur = e; cur.k === 'call' && cur.fn.k === 'attr' && PASS_THROUGH.has(cur.fn.attr); cur = cur.fn.obj) {
      const attr = cur.fn.attr;
      if ((attr === 'eval' || attr === 'train') && this.modeSwitchArgsOk(cur, attr)) return this.switchMode(cur, attr, '');
    }
    return undefined;
  }

  private isConstruction(e: Expr): boolean {
    let cur = e;
    while (cur.k === 'call' && cur.fn.k === 'attr' && PASS_THROUGH.has(cur.fn.attr)) cur = cur.fn.obj;
    if (cur.k !== 'call') return false;
    const callee = this.value(cur.fn);
    if (callee.t === 'class') return this.view.interp.isTorchModuleClass(callee.cls);
    if (callee.t === 'ext') return isKnownCaringConstructor(callee.q) || /^torch\.nn\.[A-Z]/.test(callee.q);
    return false;
  }

  private bind(t: Expr, c: { key?: string; wrapper?: string; fresh?: Mode }): void {
    if (!this.state || t.k !== 'name') return;
    const name = t.id;
    const target = c.key ? this.resolve(c.key) : undefined;
    for (const k of [...this.state.modes.keys()]) if (k === name || k.startsWith(`${name}.`)) {
      if (target === name) continue;
      this.state.modes.delete(k);
    }
    if (target !== undefined && root(target) === name && target !== name) {
      // `model = model.module`: the name now holds a part of what it held
      const m = this.read(target);
      for (const k of [...this.state.modes.keys()]) if (k === name || k.startsWith(`${name}.`)) this.state.modes.delete(k);
      this.state.alias.delete(name);
      this.state.modes.set(name, m);
      return;
    }
    if (target !== undefined) {
      if (target === name) {
        if (c.wrapper) this.state.alias.set(name, { target: name, wrapper: c.wrapper });
        return;
      }
      this.state.alias.set(name, { target, wrapper: c.wrapper });
      return;
    }
    this.state.alias.delete(name);
    this.state.modes.set(name, c.fresh ?? UNKNOWN_MODE);
  }

  private bareSwitch(s: Extract<Stmt, { k: 'expr' }>): void {
    const v = s.value;
    if (v.k !== 'attr' || (v.attr !== 'eval' && v.attr !== 'train') || !this.record) return;
    const recv = this.value(v.obj);
    if (recv.t === 'num' || recv.t === 'str' || recv.t === 'bool' || recv.t === 'list' || recv.t === 'dict' || recv.t === 'none' || recv.t === 'class' || recv.t === 'func') return;
    if (recv.t === 'ext' && !recv.q.startsWith('torch.')) return;
    this.view.bare.push({ path: this.path, stmt: s, attr: v.attr, recvText: this.src(v.obj.span) });
  }

  // ---------- helpers ----------

  /** A dotted key for a module expression; `.to(device)`/`.train()` chains keep the receiver's key. */
  private keyOf(e: Expr): string | null {
    let cur = e;
    while (cur.k === 'call' && cur.fn.k === 'attr' && PASS_THROUGH.has(cur.fn.attr)) cur = cur.fn.obj;
    if (cur.k === 'name' || cur.k === 'attr') return dottedName(cur);
    return null;
  }

  private isRegionCtx(e: Expr): boolean {
    if (e.k !== 'call') return false;
    const v = this.value(e.fn);
    if (v.t !== 'ext') return false;
    if (REGION_CTX.has(v.q)) return true;
    if (v.q === 'torch.set_grad_enabled' || v.q === 'torch.autograd.set_grad_enabled') {
      // `torch.set_grad_enabled(phase == "train")` is a region on the passes where the test folds to False
      const a = e.args[0] ?? e.kwargs.find((k) => k.name === 'mode')?.value;
      return !!a && truthy(this.fold(a)) === false;
    }
    return false;
  }

  /** `set_grad_enabled(EXPR)` whose EXPR is not a literal: a region only under this pass's constants. */
  private foldedRegion(e: Expr): boolean {
    if (e.k !== 'call') return false;
    const a = e.args[0] ?? e.kwargs.find((k) => k.name === 'mode')?.value;
    return !!a && a.k !== 'bool';
  }

  private value(e: Expr): Value {
    // the interpreter ran the assignment once; on this pass of a loop over constants the name holds this pass's value
    if (e.k === 'name') {
      const c = this.consts.get(e.id);
      if (c) return c;
    }
    try {
      // calls would run the callee in the interpreter: only names, attributes and passes-through are evaluated
      let cur = e;
      while (cur.k === 'call' && cur.fn.k === 'attr' && PASS_THROUGH.has(cur.fn.attr)) cur = cur.fn.obj;
      if (cur.k === 'call' && !this.isConstruction(cur) && !this.isWrapCall(cur)) return UNKNOWN;
      return this.view.interp.evalExpr(cur, { ...this.frame, done: false });
    } catch {
      return UNKNOWN;
    }
  }

  private isWrapCall(e: Extract<Expr, { k: 'call' }>): boolean {
    if (e.fn.k !== 'attr' && e.fn.k !== 'name') return false;
    try {
      const v = this.view.interp.evalExpr(e.fn, { ...this.frame, done: false });
      return v.t === 'ext' && (WRAPPERS.has(v.q) || v.q === SYNC_CONVERT || v.q === 'torch.compile' || LOADERS.has(v.q));
    } catch {
      return false;
    }
  }

  private src(span: Span): string {
    return this.text.slice(span.start, span.end);
  }
}

/** Names a function binds in its own body (parameters, assignments, loop and with targets, imports, nested defs). */
function localNames(fn: DefStmt): Set<string> {
  const out = boundNames(fn.body);
  for (const p of fn.params) out.add(p.name);
  return out;
}

/** Names the statements bind (assignments, loop and with targets, imports, defs), nested blocks included. */
function boundNames(stmts: readonly Stmt[]): Set<string> {
  const out = new Set<string>();
  const add = (t: Expr) => targetNames(t).forEach((n) => out.add(n));
  const visit = (stmts: readonly Stmt[]) => {
    for (const st of stmts) {
      switch (st.k) {
        case 'assign': st.targets.forEach(add); break;
        case 'augassign': add(st.target); break;
        case 'for': add(st.target); break;
        case 'with': for (const it of st.items) if (it.target) add(it.target); break;
        case 'import': for (const n of st.names) out.add(n.alias ?? n.module.split('.')[0]); break;
        case 'from': for (const n of st.names) out.add(n.alias ?? n.name); break;
        case 'def': case 'class': out.add(st.name); continue;
        default: break;
      }
      for (const b of stmtBlocks(st)) visit(b);
    }
  };
  visit(stmts);
  return out;
}

function sameConst(a: Value | undefined, b: Value): boolean {
  if (!a || a.t !== b.t) return false;
  return a.t === 'none' || (a as { v: unknown }).v === (b as { v: unknown }).v;
}

function targetNames(t: Expr): string[] {
  if (t.k === 'name') return [t.id];
  if (t.k === 'tuple' || t.k === 'list') return t.items.flatMap(targetNames);
  return [];
}

function root(key: string): string {
  const i = key.indexOf('.');
  return i < 0 ? key : key.slice(0, i);
}

export function isLoader(v: Value): v is Extract<Value, { t: 'obj' }> {
  return v.t === 'obj' && LOADERS.has(v.q);
}


/** What one BatchNorm call sees of a training loader's batch: the loader's batch_size, its origin, the wrapper's split. */
export interface PerDeviceBatch {
  /** The loader's batch_size as traced (1 when the DataLoader default applies). */
  batch: number;
  origin?: import('../values').Origin;
  /** Samples per forward on one device, or undefined when nn.DataParallel splits across an unknown count. */
  perDevice?: number;
  wrapper?: 'ddp' | 'dp';
  synced: boolean;
  inst?: ModuleInst;
  defaulted: boolean;
}

export function perDeviceBatch(p: Pair, devicesPerProcess: number | undefined): PerDeviceBatch | undefined {
  if (!isLoader(p.loader)) return undefined;
  const l = p.loader;
  if (l.kwargs.has('batch_sampler')) return undefined;
  const bv = l.kwargs.get('batch_size') ?? l.args[1];
  const defaulted = bv === undefined;
  const batch = defaulted ? 1 : num(bv);
  if (batch === undefined || !Number.isInteger(batch) || batch < 1) return undefined;
  const u = unwrap(p.model);
  const origin = bv && (bv.t === 'num' || bv.t === 'str' || bv.t === 'bool') ? bv.origin : undefined;
  // nn.DataParallel scatters each batch over its devices; a DDP process's loader batch is already its own
  const perDevice = u.wrapper === 'dp' ? (devicesPerProcess ? Math.floor(batch / devicesPerProcess) : undefined) : batch;
  return { batch, origin, perDevice, wrapper: u.wrapper, synced: u.synced, inst: u.inst, defaulted };
}
