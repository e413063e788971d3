// The data view: per script, function or notebook, the program-order def-use chains of array-like values — splits,
// preprocessing fits, transforms, datasets — and which data is training and which is held out.
import * as posix from 'node:path/posix';
import type { CallExpr, DefStmt, Expr, Span, Stmt } from '../ir';
import { walkStmts } from '../ir';
import { Interp, type Frame } from '../interp';
import { toCell } from '../source';
import { UNKNOWN, num, str, type Scope, type Value } from '../values';
import type { Workspace } from '../workspace';

export type Part = 'train' | 'holdout';

/** A split of rows: a splitting call, a K-fold `split()`, or a pair of complementary slices `[:k]` / `[k:]`. */
export interface SplitEvent {
  id: number;
  kind: 'train_test_split' | 'random_split' | 'folds' | 'slice';
  /** How a message names it: `train_test_split(...)`, `KFold.split(...)`, `slicing [:n_train] / [n_train:]`. */
  label: string;
  path: string;
  span: Span;
  /** Parts seen; a slice pair counts as a split only once both halves are seen. */
  seen: Set<Part>;
  /** Cross-validation folds (every row is held out once). */
  cv: boolean;
}

interface Seg {
  split: SplitEvent;
  part: Part;
}

/** The rows a value holds: a root population and the split parts taken from it, outermost first. */
export interface Rows {
  id: number;
  root: number;
  segs: Seg[];
}

/** What a preprocessing object is: a scikit-learn scaler, imputer or a pipeline of them. */
export interface Preprocessor {
  /** `StandardScaler`, `Pipeline(SimpleImputer, StandardScaler)`. */
  type: string;
  /** False for transformers that learn nothing from the rows (Normalizer works row by row). */
  learns: boolean;
  fits: FitEvent[];
}

/** A preprocessing fit, or hand-written statistics (mean/std/var over rows) later used to normalize data. */
export interface FitEvent {
  id: number;
  kind: 'fit' | 'fit_transform' | 'partial_fit' | 'stats';
  /** `StandardScaler`, or `mean/std` for hand-written statistics. */
  estimator: string;
  /** The fit call, or the first reduction of hand-written statistics. */
  call: CallExpr;
  path: string;
  /** Source of the call, shortened for messages. */
  text: string;
  rows: Rows;
  /** Source of the data fitted (`X`, `X_test`). */
  dataText: string;
  /** A name for the fitted data, for naming-based roles: the argument name, or the name the data was bound to. */
  dataName?: string;
  pre?: Preprocessor;
  /** `scaler` in `scaler.fit_transform(X_test)`; undefined for `StandardScaler().fit(X)`. */
  receiverName?: string;
  /** Span of the method name (`fit_transform`), for fixes. */
  methodSpan?: Span;
  learns: boolean;
  /**
   * Parameters of the enclosing function that must be None for the fit to run (`if scaler is None: scaler = ...fit(X)`):
   * a caller that passes them reuses its own fitted object, so the fit does not happen for that call.
   */
  onlyWithout?: string[];
}

export interface CvUse {
  /** `cross_val_score(...)`, `GridSearchCV.fit(...)`, `KFold.split(...)`. */
  label: string;
  path: string;
  span: Span;
  rows: Rows;
  scaledBy: FitEvent[];
}

export interface Role {
  part: Part;
  by: 'split' | 'dataset-argument' | 'name';
  /** `train_test_split(...) (train.py:77), position 2`, `"val"`, `train=False`, `the name X_test`. */
  detail: string;
  split?: SplitEvent;
}

/** The fitted data contributed rows that a later split holds out (or that cross-validation scores on). */
export interface Leak {
  fit: FitEvent;
  split?: SplitEvent;
  cv?: CvUse;
}

export interface HoldoutFit {
  fit: FitEvent;
  role: Role;
  /** An earlier fit of the same preprocessor on the training part. */
  trainFit?: FitEvent;
}

export interface TransformStep {
  /** Class name without the module: `Normalize`, `RandomHorizontalFlip`. */
  name: string;
  q: string;
  site?: { path: string; call: CallExpr };
  value: Extract<Value, { t: 'obj' }>;
}

export interface TransformChain {
  /** Where the chain is built (the `Compose(` call, or a lone transform). */
  site?: { path: string; call: CallExpr };
  steps: TransformStep[];
  /** False when some step could not be resolved. */
  complete: boolean;
}

/** A dataset built with a transform (directly, through a helper, or as a part of a split dataset). */
export interface DatasetUse {
  path: string;
  span: Span;
  /** The function (or `<module>`) whose body builds it; chains are compared within one body. */
  body: string;
  name?: string;
  /** How messages name it: the name it is bound to, else the call (`datasets.CIFAR10(...)`). */
  label: string;
  role?: Role;
  transform?: TransformChain;
  /** `ds.transform = ...` (for a split part: `ds.dataset.transform = ...`) later replaces the transform. */
  overridden: boolean;
  /** A part of a split dataset (a Subset: its own `.transform` attribute is never read). */
  fromSplit: boolean;
}

export interface FileData {
  fits: FitEvent[];
  splits: SplitEvent[];
  cvUses: CvUse[];
  datasets: DatasetUse[];
  /** Fits whose statistics include rows a later split holds out. */
  splitLeaks: Leak[];
  /** Fits whose statistics include rows that cross-validation later scores on. */
  cvLeaks: Leak[];
  holdoutFits: HoldoutFit[];
}

// ---------- library names (canonical, as the interpreter resolves them) ----------

const PREPROCESSORS: Record<string, boolean> = {
  'sklearn.preprocessing.StandardScaler': true,
  'sklearn.preprocessing.MinMaxScaler': true,
  'sklearn.preprocessing.RobustScaler': true,
  'sklearn.preprocessing.MaxAbsScaler': true,
  // Normalizer rescales each row by its own norm: fit learns nothing from the other rows
  'sklearn.preprocessing.Normalizer': false,
  'sklearn.preprocessing.QuantileTransformer': true,
  'sklearn.preprocessing.PowerTransformer': true,
  'sklearn.impute.SimpleImputer': true,
  'sklearn.impute.KNNImputer': true,
  'sklearn.impute.IterativeImputer': true,
};
/** scikit-learn's one-call forms: statistics of all rows of the argument, applied to it (fit_transform in one step). */
const SCALE_FUNCTIONS: Record<string, string> = {
  'sklearn.preprocessing.scale': 'StandardScaler', 'sklearn.preprocessing.minmax_scale': 'MinMaxScaler',
  'sklearn.preprocessing.robust_scale': 'RobustScaler', 'sklearn.preprocessing.maxabs_scale': 'MaxAbsScaler',
  'sklearn.preprocessing.quantile_transform': 'QuantileTransformer', 'sklearn.preprocessing.power_transform': 'PowerTransformer',
};
const PIPELINES = new Set(['sklearn.pipeline.make_pipeline', 'sklearn.pipeline.Pipeline', 'sklearn.compose.ColumnTransformer',
  'sklearn.compose.make_column_transformer']);
const SPLITTERS = new Set(['KFold', 'StratifiedKFold', 'GroupKFold', 'StratifiedGroupKFold', 'RepeatedKFold', 'RepeatedStratifiedKFold',
  'ShuffleSplit', 'StratifiedShuffleSplit', 'GroupShuffleSplit', 'TimeSeriesSplit', 'LeaveOneOut', 'LeavePOut', 'LeaveOneGroupOut',
  'LeavePGroupsOut', 'PredefinedSplit'].map((n) => `sklearn.model_selection.${n}`));
const SEARCHES = new Set(['GridSearchCV', 'RandomizedSearchCV', 'HalvingGridSearchCV', 'HalvingRandomSearchCV'].map((n) => `sklearn.model_selection.${n}`));
/** Functions that cross-validate an estimator on X (their second argument). */
const CV_FUNCTIONS = new Set(['cross_val_score', 'cross_validate', 'cross_val_predict', 'learning_curve', 'validation_curve',
  'permutation_test_score'].map((n) => `sklearn.model_selection.${n}`));
const TRAIN_TEST_SPLIT = new Set(['sklearn.model_selection.train_test_split', 'sklearn.cross_validation.train_test_split']);
const RANDOM_SPLIT = new Set(['torch.utils.data.random_split', 'torch.utils.data.dataset.random_split']);
const SUBSET = new Set(['torch.utils.data.Subset', 'torch.utils.data.dataset.Subset']);
const LOADERS = new Set(['torch.utils.data.DataLoader', 'torch.utils.data.dataloader.DataLoader']);
const REDUCTION_FUNCTIONS = new Set(['numpy.mean', 'numpy.std', 'numpy.var', 'numpy.nanmean', 'numpy.nanstd', 'numpy.nanvar',
  'torch.mean', 'torch.std', 'torch.var']);
const REDUCTION_METHODS = new Set(['mean', 'std', 'var', 'nanmean', 'nanstd', 'nanvar']);
/** Library functions whose result holds the same rows as their first argument. */
const ROW_PRESERVING_FUNCTIONS = new Set(['numpy.asarray', 'numpy.array', 'numpy.asanyarray', 'numpy.ascontiguousarray', 'numpy.float32',
  'numpy.float64', 'numpy.nan_to_num', 'numpy.log', 'numpy.log1p', 'numpy.sqrt', 'numpy.abs', 'numpy.clip', 'numpy.exp',
  'torch.tensor', 'torch.as_tensor', 'torch.from_numpy', 'torch.Tensor', 'torch.FloatTensor', 'pandas.DataFrame',
  'torch.utils.data.TensorDataset', 'torch.utils.data.dataset.TensorDataset']);
/** Array methods whose result holds the same rows. */
const ROW_PRESERVING_METHODS = new Set(['astype', 'copy', 'to', 'float', 'double', 'half', 'long', 'int', 'numpy', 'cpu', 'cuda',
  'detach', 'clone', 'to_numpy', 'fillna', 'clip', 'abs', 'squeeze', 'unsqueeze', 'reshape', 'view', 'contiguous', 'type',
  'round', 'replace', 'drop', 'rename', 'select_dtypes', 'assign', 'ffill', 'bfill', 'interpolate', 'log1p', 'sqrt',
  'ravel', 'flatten']);
/** Attributes of a fitted scaler that hold its statistics. */
const STAT_ATTRS = new Set(['mean_', 'scale_', 'var_', 'center_', 'data_min_', 'data_max_', 'data_range_', 'min_', 'statistics_']);
/** torchvision dataset classes that take `transform` as a positional argument, and its index. */
const TRANSFORM_POSITION: Record<string, number> = {
  'torchvision.datasets.ImageFolder': 1, 'torchvision.datasets.DatasetFolder': 3,
  'torchvision.datasets.CIFAR10': 2, 'torchvision.datasets.CIFAR100': 2, 'torchvision.datasets.MNIST': 2,
  'torchvision.datasets.FashionMNIST': 2, 'torchvision.datasets.KMNIST': 2,
};

const HOLDOUT_WORDS = new Set(['test', 'tests', 'testing', 'val', 'valid', 'validation', 'holdout', 'heldout', 'eval', 'evaluation', 'dev']);
const TRAIN_WORDS = new Set(['train', 'training', 'trn']);

/** Splits `X_test`, `valSet`, `data/val` into lower-case words. */
function words(s: string): string[] {
  return s.replace(/([a-z0-9])([A-Z])/g, '$1_$2').toLowerCase().split(/[^a-z]+/).filter(Boolean);
}

/** The part a name or path says it holds, if exactly one kind of word says so (`dev` only in names: `/dev/shm`). */
export function partFromWords(s: string, path = false): Part | undefined {
  const ws = words(s);
  const h = ws.some((w) => HOLDOUT_WORDS.has(w) && !(path && w === 'dev'));
  const t = ws.some((w) => TRAIN_WORDS.has(w));
  if (h === t) return undefined;
  return h ? 'holdout' : 'train';
}

function shortName(q: string): string {
  return q.slice(q.lastIndexOf('.') + 1);
}

/** `torchvision.transforms.v2.Normalize` → `torchvision.transforms.Normalize` (v2 and the implementation modules). */
export function transformName(q: string): string | undefined {
  const m = /^torchvision\.transforms\.(?:v2\.|transforms\.|_transforms\.)?([A-Za-z0-9_]+)$/.exec(q);
  return m ? m[1] : undefined;
}

// ---------- abstract values of the walk ----------

type DVal =
  | { d: 'array'; rows: Rows; scaledBy: FitEvent[]; name?: string; dataset?: DatasetUse; transformValue?: Value }
  | { d: 'stats'; rows: Rows; call: CallExpr; path: string; dataText: string; fit?: FitEvent }
  | { d: 'pre'; pre: Preprocessor }
  | { d: 'folds'; split: SplitEvent; rows: Rows }
  | { d: 'index'; seg: Seg }
  | { d: 'enum'; inner: DVal }
  | { d: 'tuple'; items: (DVal | undefined)[] };

type DArray = Extract<DVal, { d: 'array' }>;

interface CallRec {
  callee: Value;
  args: Value[];
  kwargs: Map<string, Value>;
  result: Value;
}

interface Body {
  path: string;
  /** `<module>` or the function's name. */
  name: string;
  frame: Frame;
  env: Map<string, DVal>;
  calls: Map<CallExpr, CallRec>;
  memo: Map<Expr, DVal | undefined>;
  /** Slice splits by rows and bound: `[:k]` and `[k:]` of the same rows are one split. */
  slices: Map<string, SplitEvent>;
  /** Transform applications: a fitted preprocessor's statistics applied to data. */
  applied: { fits: FitEvent[]; rows: Rows }[];
  /** Split calls with their input. */
  splitInputs: { split: SplitEvent; input: DArray }[];
  cvUses: CvUse[];
  /** Parameter names and the root of the rows each stands for. */
  params: Map<string, number>;
  /** Values of the `return` statements, for the function's summary. */
  returns: (DVal | undefined)[];
}

interface Summary {
  returns: { item?: number; param: string; fits: FitEvent[] }[];
}

let ids = 1;

export class DataView {
  private readonly cache = new Map<string, FileData>();
  /** Preprocessors by the interpreter object that stands for them (so chained and named forms meet). */
  private readonly preByObj = new WeakMap<object, Preprocessor>();
  private readonly summaries = new Map<DefStmt, Summary>();

  /** The interpreter of the file being analysed (one per file, see `forFile`). */
  private interp: Interp;

  constructor(readonly ws: Workspace) {
    this.interp = new Interp(ws);
  }

  /** Everything the data view knows about one file (a script, a module of functions, or a notebook). */
  forFile(path: string): FileData {
    const hit = this.cache.get(path);
    if (hit) return hit;
    const out: FileData = { fits: [], splits: [], cvUses: [], datasets: [], splitLeaks: [], cvLeaks: [], holdoutFits: [] };
    this.cache.set(path, out);
    const file = this.ws.get(path);
    if (!file) return out;
    // a fresh interpreter per file: its bounded step budget then depends on this file alone
    this.interp = new Interp(this.ws);
    const top = file.facts.ir.body;
    this.runBody(path, '<module>', top, [], out);
    walkStmts(top, (s) => {
      if (s.k === 'def') this.runBody(path, s.name, s.body, paramNames(s), out);
    });
    return out;
  }

  /** `train.py:34`, or `explore.ipynb cell 4, line 1` for a notebook (cells counted among all cells, 1-based). */
  place(path: string, line0: number): string {
    const src = this.ws.get(path)?.source;
    const base = posix.basename(path);
    if (src?.cells) {
      const c = toCell(src, line0, 0);
      if (c) return `${base} cell ${c.cell + 1}, line ${c.line + 1}`;
    }
    return `${base}:${line0 + 1}`;
  }

  /** Short source text of a span for messages (at most `max` characters, on one line). */
  text(path: string, span: Span, max = 60): string {
    const t = (this.ws.get(path)?.source.text ?? '').slice(span.start, span.end).replace(/\s+/g, ' ');
    return t.length > max ? `${t.slice(0, max - 1)}…` : t;
  }

  // ---------- walking one body ----------

  private runBody(path: string, name: string, stmts: readonly Stmt[], params: string[], out: FileData): Body {
    const moduleScope = this.interp.moduleScope(path);
    const scope: Scope = { path, vars: new Map(), parent: moduleScope };
    for (const p of params) scope.vars.set(p, UNKNOWN);
    const b: Body = {
      path, name, env: new Map(), calls: new Map(), memo: new Map(), slices: new Map(), applied: [], splitInputs: [], cvUses: [],
      frame: { scope, path, body: stmts, done: false, depth: 0 }, params: new Map(), returns: [],
    };
    for (const p of params) {
      const a = this.freshArray(p);
      b.env.set(p, a);
      b.params.set(p, a.rows.root);
    }
    const fitsBefore = out.fits.length;
    this.block(stmts, b, out);
    this.conclude(b, out, fitsBefore);
    return b;
  }

  /**
   * What a function returns in terms of its parameters: "parameter X, scaled by these fits on all of X" (also for
   * the items of a returned tuple), so a caller that then splits or refits follows the data through the call.
   */
  private summaryOf(stmt: DefStmt, path: string): Summary {
    const hit = this.summaries.get(stmt);
    if (hit) return hit;
    const empty: Summary = { returns: [] };
    this.summaries.set(stmt, empty);
    const scratch: FileData = { fits: [], splits: [], cvUses: [], datasets: [], splitLeaks: [], cvLeaks: [], holdoutFits: [] };
    const b = this.runBody(path, stmt.name, stmt.body, paramNames(stmt), scratch);
    const out: Summary = { returns: [] };
    const visit = (v: DVal | undefined, item: number | undefined) => {
      if (v?.d === 'tuple' && item === undefined) return v.items.forEach((x, i) => visit(x, i));
      if (v?.d !== 'array' || v.rows.segs.length) return;
      const param = [...b.params].find(([, root]) => root === v.rows.root)?.[0];
      const fits = v.scaledBy.filter((f) => f.learns && f.rows.root === v.rows.root && f.rows.segs.length === 0);
      if (param && fits.length) out.returns.push({ item, param, fits });
    };
    for (const r of b.returns) visit(r, undefined);
    this.summaries.set(stmt, out);
    return out;
  }

  /** A call of a summarised function: its fits, re-applied to the rows the caller passes. */
  private applySummary(e: CallExpr, fn: DefStmt, sum: Summary, args: (DVal | undefined)[], kw: Map<string, DVal | undefined>, b: Body, out: FileData): DVal | undefined {
    const positional = fn.params.filter((p) => p.kind === 'normal').map((p) => p.name);
    const argFor = (param: string): { v: DVal | undefined; expr?: Expr } => {
      const i = positional.indexOf(param);
      if (i >= 0 && i < e.args.length && e.args.slice(0, i + 1).every((a) => a.k !== 'star')) return { v: args[i], expr: e.args[i] };
      const k = e.kwargs.find((x) => x.name === param);
      return k ? { v: kw.get(param), expr: k.value } : { v: undefined };
    };
    const items: (DVal | undefined)[] = [];
    let whole: DVal | undefined;
    for (const r of sum.returns) {
      const { v, expr } = argFor(r.param);
      if (v?.d !== 'array' || !expr) continue;
      // a fit guarded by `if param is None` does not run when the caller passes that parameter
      const runs = r.fits.filter((f) => !f.onlyWithout?.some((p) => {
        const a = argFor(p).expr;
        return a !== undefined && a.k !== 'none';
      }));
      if (!runs.length) continue;
      // no fix through a call: the edit would land in the helper, which other callers share
      const fits = runs.map((f): FitEvent => ({
        ...f, id: ids++, rows: v.rows, dataText: this.text(b.path, expr.span, 30), dataName: expr.k === 'name' ? expr.id : v.name,
        receiverName: undefined, methodSpan: undefined, pre: undefined,
      }));
      out.fits.push(...fits);
      b.applied.push({ fits, rows: v.rows });
      const res = this.derived(v, fits);
      if (r.item === undefined) whole = res;
      else items[r.item] = res;
    }
    if (whole) return whole;
    if (items.length) return { d: 'tuple', items };
    return undefined;
  }

  private block(stmts: readonly Stmt[], b: Body, out: FileData): void {
    for (const s of stmts) {
      try {
        this.stmt(s, b, out);
      } catch {
        // a statement the walk cannot follow leaves its names unbound; the rest of the body still counts
      }
    }
  }

  private stmt(s: Stmt, b: Body, out: FileData): void {
    switch (s.k) {
      case 'assign': {
        const iv = this.ieval(s.value, b);
        const dv = this.dv(s.value, b, out);
        for (const t of s.targets) {
          this.interp.assign(t, iv, b.frame);
          this.bind(t, dv, b, out);
        }
        return;
      }
      case 'augassign': {
        this.ieval(s.value, b);
        const cur = this.dv(s.target, b, out);
        const rhs = this.dv(s.value, b, out);
        const v = this.binop(s.op.slice(0, -1), cur, rhs, b, out);
        if (s.target.k === 'name') {
          this.interp.assign(s.target, UNKNOWN, b.frame);
          if (v) b.env.set(s.target.id, v);
        }
        return;
      }
      case 'expr': this.ieval(s.value, b); this.dv(s.value, b, out); return;
      case 'return': if (s.value) { this.ieval(s.value, b); b.returns.push(this.dv(s.value, b, out)); } return;
      case 'if': {
        this.ieval(s.test, b);
        this.dv(s.test, b, out);
        const guard = noneGuard(s.test, b.params);
        let before = out.fits.length;
        this.block(s.body, b, out);
        if (guard && !guard.negated) for (const f of out.fits.slice(before)) (f.onlyWithout ??= []).push(guard.param);
        before = out.fits.length;
        this.block(s.orelse, b, out);
        if (guard?.negated) for (const f of out.fits.slice(before)) (f.onlyWithout ??= []).push(guard.param);
        return;
      }
      case 'while': this.block(s.body, b, out); this.block(s.orelse, b, out); return;
      case 'for': {
        this.ieval(s.iter, b);
        const it = this.dv(s.iter, b, out);
        this.interp.assign(s.target, UNKNOWN, b.frame);
        this.bindLoop(s.target, it, b);
        this.block(s.body, b, out);
        this.block(s.orelse, b, out);
        return;
      }
      case 'with':
        for (const item of s.items) {
          this.ieval(item.ctx, b);
          this.dv(item.ctx, b, out);
          if (item.target) {
            this.interp.assign(item.target, UNKNOWN, b.frame);
            this.unbind(item.target, b);
          }
        }
        this.block(s.body, b, out);
        return;
      case 'try':
        this.block(s.body, b, out);
        for (const h of s.handlers) this.block(h, b, out);
        this.block(s.orelse, b, out);
        this.block(s.finalbody, b, out);
        return;
      default:
        // def/class bodies are walked on their own; imports resolve through the module scope
        return;
    }
  }

  /** Evaluates an expression in the interpreter, recording each call it makes with its resolved values. */
  private ieval(e: Expr, b: Body): Value {
    const obs = (call: CallExpr, callee: Value, args: Value[], kwargs: Map<string, Value>, _f: Frame, result: Value) => {
      b.calls.set(call, { callee, args, kwargs, result });
    };
    this.interp.observers.push(obs);
    try {
      b.frame.done = false;
      return this.interp.evalExpr(e, b.frame);
    } catch {
      return UNKNOWN;
    } finally {
      const i = this.interp.observers.indexOf(obs);
      if (i >= 0) this.interp.observers.splice(i, 1);
    }
  }

  private freshArray(name?: string): DArray {
    return { d: 'array', rows: { id: ids++, root: ids++, segs: [] }, scaledBy: [], name };
  }

  private derived(a: DArray, extra: FitEvent[] = []): DArray {
    return { d: 'array', rows: a.rows, scaledBy: extra.length ? [...a.scaledBy, ...extra] : a.scaledBy, dataset: a.dataset, transformValue: a.transformValue };
  }

  private part(a: DArray, seg: Seg): DArray {
    return { d: 'array', rows: { id: ids++, root: a.rows.root, segs: [...a.rows.segs, seg] }, scaledBy: a.scaledBy, transformValue: a.transformValue };
  }

  private bind(t: Expr, v: DVal | undefined, b: Body, out: FileData): void {
    switch (t.k) {
      case 'name': {
        if (!v) {
          b.env.delete(t.id);
          return;
        }
        if (v.d === 'array') {
          if (v.name === undefined) v.name = t.id;
          if (v.dataset && v.dataset.name === undefined) {
            v.dataset.name = t.id;
            v.dataset.label = t.id;
            if (!v.dataset.role) {
              const p = partFromWords(t.id);
              if (p) v.dataset.role = { part: p, by: 'name', detail: `the name \`${t.id}\`` };
            }
          }
        }
        b.env.set(t.id, v);
        return;
      }
      case 'tuple': case 'list': {
        const items = v?.d === 'tuple' ? v.items : undefined;
        t.items.forEach((x, i) => {
          if (x.k === 'star') return this.unbind(x.value, b);
          if (items) return this.bind(x, items[i], b, out);
          // unpacking a value of unknown structure: each name gets rows of its own
          this.bind(x, v?.d === 'array' ? this.freshArray() : undefined, b, out);
        });
        return;
      }
      case 'attr': {
        // `val_set.transform = ...` / `val_set.dataset.transform = ...` replaces the transform a dataset was built with
        if (t.attr === 'transform') {
          const viaDataset = t.obj.k === 'attr' && t.obj.attr === 'dataset';
          const root = viaDataset ? (t.obj as { obj: Expr }).obj : t.obj;
          const dv = root.k === 'name' ? b.env.get(root.id) : undefined;
          // a Subset reads its dataset's transform, never an attribute set on itself
          if (dv?.d === 'array' && dv.dataset && viaDataset === dv.dataset.fromSplit) dv.dataset.overridden = true;
        }
        return;
      }
      default: return;
    }
  }

  private unbind(t: Expr, b: Body): void {
    if (t.k === 'name') b.env.delete(t.id);
    else if (t.k === 'tuple' || t.k === 'list') t.items.forEach((x) => this.unbind(x.k === 'star' ? x.value : x, b));
  }

  private bindLoop(t: Expr, it: DVal | undefined, b: Body): void {
    const foldPair = (x: Expr, folds: Extract<DVal, { d: 'folds' }>) => {
      if ((x.k === 'tuple' || x.k === 'list') && x.items.length === 2 && x.items.every((i) => i.k === 'name')) {
        folds.split.seen.add('train').add('holdout');
        b.env.set((x.items[0] as { id: string }).id, { d: 'index', seg: { split: folds.split, part: 'train' } });
        b.env.set((x.items[1] as { id: string }).id, { d: 'index', seg: { split: folds.split, part: 'holdout' } });
        return true;
      }
      return false;
    };
    if (it?.d === 'folds' && foldPair(t, it)) return;
    if (it?.d === 'enum' && it.inner.d === 'folds' && (t.k === 'tuple' || t.k === 'list') && t.items.length === 2) {
      this.unbind(t.items[0], b);
      if (foldPair(t.items[1], it.inner)) return;
    }
    this.unbind(t, b);
  }

  // ---------- expressions ----------

  private dv(e: Expr, b: Body, out: FileData): DVal | undefined {
    if (b.memo.has(e)) return b.memo.get(e);
    b.memo.set(e, undefined);
    const v = this.dvInner(e, b, out);
    b.memo.set(e, v);
    return v;
  }

  private dvInner(e: Expr, b: Body, out: FileData): DVal | undefined {
    switch (e.k) {
      case 'name': {
        const v = b.env.get(e.id);
        if (v) return v;
        // a global or a name bound where the walk does not look: data of its own, or a preprocessor object
        const iv = this.interp.lookup(b.frame.scope, e.id);
        if (iv.t === 'obj') {
          const pre = this.preprocessorOf(iv);
          if (pre) return { d: 'pre', pre };
        }
        if (iv.t !== 'unknown' && iv.t !== 'obj') return undefined;
        const a = this.freshArray(e.id);
        b.env.set(e.id, a);
        return a;
      }
      case 'attr': {
        const o = this.dv(e.obj, b, out);
        // same rows: `.values`, `.data`, and pandas' row indexers (`df.iloc[:n]` is then sliced like an array)
        if (o?.d === 'array' && ['values', 'data', 'T', 'iloc', 'loc'].includes(e.attr)) return this.derived(o);
        if (o?.d === 'pre' && STAT_ATTRS.has(e.attr)) {
          const last = o.pre.fits[o.pre.fits.length - 1];
          if (last && o.pre.learns) return { d: 'stats', rows: last.rows, call: last.call, path: last.path, dataText: last.dataText, fit: last };
        }
        return undefined;
      }
      case 'call': return this.call(e, b, out);
      case 'sub': return this.subscript(e, b, out);
      case 'bin': return this.binop(e.op, this.dv(e.left, b, out), this.dv(e.right, b, out), b, out);
      case 'unary': {
        const v = this.dv(e.operand, b, out);
        return v?.d === 'array' ? this.derived(v) : v?.d === 'stats' ? v : undefined;
      }
      case 'cmp': {
        const vs = e.operands.map((o) => this.dv(o, b, out));
        const a = vs.find((v): v is DArray => v?.d === 'array');
        return a ? this.derived(a) : undefined;
      }
      case 'tuple': case 'list': return { d: 'tuple', items: e.items.map((i) => (i.k === 'star' ? (this.dv(i.value, b, out), undefined) : this.dv(i, b, out))) };
      case 'cond': {
        this.dv(e.test, b, out);
        const x = this.dv(e.body, b, out);
        const y = this.dv(e.orelse, b, out);
        return x ?? y;
      }
      case 'boolop': {
        const x = this.dv(e.left, b, out);
        const y = this.dv(e.right, b, out);
        return y ?? x;
      }
      case 'walrus': {
        const v = this.dv(e.value, b, out);
        if (v) b.env.set(e.target, v);
        return v;
      }
      case 'dict': for (const en of e.entries) this.dv(en.value, b, out); return undefined;
      case 'star': return this.dv(e.value, b, out);
      default: return undefined;
    }
  }

  private binop(op: string, l: DVal | undefined, r: DVal | undefined, b: Body, out: FileData): DVal | undefined {
    if (l?.d === 'array' && r?.d === 'stats' && (op === '-' || op === '/')) return this.normalizeBy(l, r, b, out);
    if (l?.d === 'array') return this.derived(l);
    if (l?.d === 'stats') return l;
    if (r?.d === 'array') return this.derived(r);
    if (r?.d === 'stats') return r;
    return undefined;
  }

  /** `(X - mu) / sd`: hand-written statistics applied to data make them a fit. */
  private normalizeBy(a: DArray, s: Extract<DVal, { d: 'stats' }>, b: Body, out: FileData): DArray {
    if (s.fit && a.scaledBy.includes(s.fit)) return this.derived(a);
    // mean and std of the same rows normalize once: one fit, named by the first reduction
    const same = a.scaledBy.find((f) => f.kind === 'stats' && f.rows === s.rows);
    if (same) return this.derived(a);
    if (!s.fit) {
      s.fit = {
        id: ids++, kind: 'stats', estimator: 'mean/std', call: s.call, path: s.path, text: this.text(s.path, s.call.span),
        rows: s.rows, dataText: s.dataText, learns: true,
      };
      out.fits.push(s.fit);
    }
    b.applied.push({ fits: [s.fit], rows: a.rows });
    return this.derived(a, [s.fit]);
  }

  private subscript(e: Extract<Expr, { k: 'sub' }>, b: Body, out: FileData): DVal | undefined {
    const o = this.dv(e.obj, b, out);
    if (o?.d === 'tuple') {
      const i = num(this.ieval(e.index, b));
      return i !== undefined && Number.isInteger(i) ? o.items[i < 0 ? o.items.length + i : i] : undefined;
    }
    if (o?.d === 'stats') return o;
    if (o?.d !== 'array') {
      this.dv(e.index, b, out);
      return undefined;
    }
    let rowIndex: Expr = e.index;
    if (e.index.k === 'tuple' && e.index.items.length) rowIndex = e.index.items[0];
    if (rowIndex.k === 'slice') {
      const { lower, upper, step } = rowIndex;
      if (!step && (lower === null) !== (upper === null)) {
        const bound = exprKey((lower ?? upper)!);
        if (bound !== undefined) {
          const part: Part = upper ? 'train' : 'holdout';
          const key = `${o.rows.id}|${bound}`;
          let sp = b.slices.get(key);
          if (!sp) {
            sp = { id: ids++, kind: 'slice', label: `slicing [:${bound}] / [${bound}:]`, path: b.path, span: e.span, seen: new Set(), cv: false };
            b.slices.set(key, sp);
            out.splits.push(sp);
            b.splitInputs.push({ split: sp, input: o });
          }
          sp.seen.add(part);
          return this.part(o, { split: sp, part });
        }
      }
      return this.derived(o);
    }
    const idx = this.dv(rowIndex, b, out);
    if (idx?.d === 'index') {
      b.splitInputs.push({ split: idx.seg.split, input: o });
      return this.part(o, idx.seg);
    }
    if (idx?.d === 'array' && idx.rows.segs.length && idx.rows.root !== o.rows.root) {
      // indexing by an index array that came out of a split: `X[train_idx]`
      const seg = idx.rows.segs[idx.rows.segs.length - 1];
      const sp: SplitEvent = seg.split;
      if (sp.kind === 'train_test_split' || sp.kind === 'random_split') {
        b.splitInputs.push({ split: sp, input: o });
        return this.part(o, seg);
      }
    }
    return this.derived(o);
  }

  private calleeOf(e: CallExpr, b: Body): CallRec {
    const rec = b.calls.get(e);
    if (rec) return rec;
    // a call the statement's evaluation did not reach (a short-circuit, say): evaluate it on its own
    this.ieval(e, b);
    return b.calls.get(e) ?? { callee: UNKNOWN, args: [], kwargs: new Map(), result: UNKNOWN };
  }

  private call(e: CallExpr, b: Body, out: FileData): DVal | undefined {
    const rec = this.calleeOf(e, b);
    const recv = e.fn.k === 'attr' ? this.dv(e.fn.obj, b, out) : undefined;
    const args = e.args.map((a) => this.dv(a, b, out));
    const kw = new Map(e.kwargs.map((k) => [k.name, this.dv(k.value, b, out)] as const));
    const callee = rec.callee;
    const arr = (v: DVal | undefined) => (v?.d === 'array' ? v : undefined);

    // methods: on a preprocessor, a splitter, a search, or an array
    if (e.fn.k === 'attr') {
      const method = e.fn.attr;
      const bound = callee.t === 'obj' ? callee.state.get('__bound__') : undefined;
      const pre = recv?.d === 'pre' ? recv.pre : bound ? this.preprocessorOf(bound) : undefined;
      if (pre) return this.preMethod(e, method, pre, arr(args[0]), b, out);
      const bq = bound?.t === 'obj' ? bound.q : undefined;
      if (bq && SPLITTERS.has(bq) && method === 'split') {
        const x = arr(args[0]);
        if (!x) return undefined;
        const sp: SplitEvent = { id: ids++, kind: 'folds', label: `${shortName(bq)}.split(...)`, path: b.path, span: e.span, seen: new Set(), cv: true };
        out.splits.push(sp);
        b.splitInputs.push({ split: sp, input: x });
        this.cvUse(b, out, { label: sp.label, path: b.path, span: e.span, rows: x.rows, scaledBy: x.scaledBy });
        return { d: 'folds', split: sp, rows: x.rows };
      }
      if (bq && SEARCHES.has(bq) && method === 'fit') {
        const x = arr(args[0] ?? kw.get('X'));
        if (x) this.cvUse(b, out, { label: `${shortName(bq)}.fit(...)`, path: b.path, span: e.span, rows: x.rows, scaledBy: x.scaledBy });
        return undefined;
      }
      if (recv?.d === 'array') {
        if (REDUCTION_METHODS.has(method)) {
          const axis = rec.kwargs.get('axis') ?? rec.kwargs.get('dim') ?? rec.args[0];
          if (overRows(axis, rec.kwargs.has('axis') || rec.kwargs.has('dim') || rec.args.length > 0)) {
            return { d: 'stats', rows: recv.rows, call: e, path: b.path, dataText: this.text(b.path, e.fn.obj.span, 30) };
          }
          return undefined;
        }
        if (ROW_PRESERVING_METHODS.has(method)) return this.derived(recv);
        return this.freshArray();
      }
      if (recv?.d === 'stats') return recv;
    }

    const q = callee.t === 'ext' ? callee.q : undefined;
    if (q) {
      if (q === 'builtins.enumerate' && args[0]?.d === 'folds') return { d: 'enum', inner: args[0] };
      if (q in PREPROCESSORS || PIPELINES.has(q)) {
        const pre = rec.result.t === 'obj' ? this.preprocessorOf(rec.result) : undefined;
        return pre ? { d: 'pre', pre } : undefined;
      }
      if (q in SCALE_FUNCTIONS) {
        const x = arr(args[0] ?? kw.get('X'));
        const argExpr = e.args[0] ?? e.kwargs.find((k) => k.name === 'X')?.value;
        if (x && argExpr) {
          const fit: FitEvent = {
            id: ids++, kind: 'fit_transform', estimator: SCALE_FUNCTIONS[q], call: e, path: b.path, text: this.text(b.path, e.span), rows: x.rows,
            dataText: this.text(b.path, argExpr.span, 30), dataName: argExpr.k === 'name' ? argExpr.id : x.name, learns: true,
          };
          out.fits.push(fit);
          b.applied.push({ fits: [fit], rows: x.rows });
          return this.derived(x, [fit]);
        }
      }
      if (TRAIN_TEST_SPLIT.has(q)) return this.trainTestSplit(e, args, b, out);
      if (RANDOM_SPLIT.has(q)) return this.randomSplit(e, arr(args[0] ?? kw.get('dataset')), rec, b, out);
      if (SUBSET.has(q)) {
        const ds = arr(args[0] ?? kw.get('dataset'));
        const idx = args[1] ?? kw.get('indices');
        if (ds && idx?.d === 'index') return this.datasetPart(this.part(ds, idx.seg), b, out, e.span, { part: idx.seg.part, by: 'split', detail: `\`${idx.seg.split.label}\` (${this.place(idx.seg.split.path, idx.seg.split.span.line)})`, split: idx.seg.split });
        if (ds && idx?.d === 'array' && idx.rows.segs.length) {
          const seg = idx.rows.segs[idx.rows.segs.length - 1];
          return this.datasetPart(this.part(ds, seg), b, out, e.span, { part: seg.part, by: 'split', detail: `\`${seg.split.label}\` (${this.place(seg.split.path, seg.split.span.line)})`, split: seg.split });
        }
        return ds ? this.derived(ds) : undefined;
      }
      if (LOADERS.has(q)) {
        // a loader over a dataset the walk knows keeps its rows, role and transform
        const ds = arr(args[0] ?? kw.get('dataset'));
        if (ds) return this.derived(ds);
      }
      if (CV_FUNCTIONS.has(q)) {
        const x = arr(args[1] ?? kw.get('X'));
        if (x) this.cvUse(b, out, { label: `${shortName(q)}(...)`, path: b.path, span: e.span, rows: x.rows, scaledBy: x.scaledBy });
        return this.freshArray();
      }
      if (REDUCTION_FUNCTIONS.has(q)) {
        const x = arr(args[0]);
        const axis = rec.kwargs.get('axis') ?? rec.kwargs.get('dim') ?? rec.args[1];
        if (x && overRows(axis, rec.kwargs.has('axis') || rec.kwargs.has('dim') || rec.args.length > 1)) {
          return { d: 'stats', rows: x.rows, call: e, path: b.path, dataText: this.text(b.path, e.args[0].span, 30) };
        }
        return undefined;
      }
      if (ROW_PRESERVING_FUNCTIONS.has(q)) {
        const x = arr(args[0]);
        if (x) return this.derived(x);
      }
    }
    // a function of the workspace that returns its argument scaled on all its rows
    if (callee.t === 'func' && !callee.self && !callee.fn.owner) {
      const sum = this.summaryOf(callee.fn.stmt, callee.fn.path);
      const v = sum.returns.length ? this.applySummary(e, callee.fn.stmt, sum, args, kw, b, out) : undefined;
      if (v) return v;
    }
    // a dataset built with a transform, or a preprocessor, here or in a helper the interpreter followed
    const ds = this.datasetOf(e, rec, b, out);
    if (ds) return ds;
    const made = rec.result.t === 'obj' ? this.preprocessorOf(rec.result) : undefined;
    if (made) return { d: 'pre', pre: made };
    return this.freshArray();
  }

  private cvUse(b: Body, out: FileData, cv: CvUse): void {
    b.cvUses.push(cv);
    out.cvUses.push(cv);
  }

  private preMethod(e: CallExpr, method: string, pre: Preprocessor, x: DArray | undefined, b: Body, out: FileData): DVal | undefined {
    if ((method === 'fit' || method === 'fit_transform' || method === 'partial_fit') && x && e.fn.k === 'attr') {
      const argExpr = e.args[0];
      const recvExpr = e.fn.obj;
      const fit: FitEvent = {
        id: ids++, kind: method, estimator: pre.type, call: e, path: b.path, text: this.text(b.path, e.span), rows: x.rows,
        dataText: argExpr ? this.text(b.path, argExpr.span, 30) : '?',
        dataName: argExpr?.k === 'name' ? argExpr.id : x.name,
        pre, receiverName: recvExpr.k === 'name' ? recvExpr.id : undefined, methodSpan: e.fn.attrSpan, learns: pre.learns,
      };
      if (method !== 'partial_fit') pre.fits.length = 0;
      pre.fits.push(fit);
      out.fits.push(fit);
      if (method === 'fit_transform') {
        b.applied.push({ fits: [fit], rows: x.rows });
        return this.derived(x, fit.learns ? [fit] : []);
      }
      return { d: 'pre', pre };
    }
    if (method === 'transform' && x) {
      const fits = pre.learns ? [...pre.fits] : [];
      if (fits.length) b.applied.push({ fits, rows: x.rows });
      return this.derived(x, fits);
    }
    if (method === 'inverse_transform' && x) return this.derived(x);
    return undefined;
  }

  private trainTestSplit(e: CallExpr, args: (DVal | undefined)[], b: Body, out: FileData): DVal | undefined {
    const sp: SplitEvent = { id: ids++, kind: 'train_test_split', label: 'train_test_split(...)', path: b.path, span: e.span, seen: new Set(['train', 'holdout']), cv: false };
    out.splits.push(sp);
    const items: (DVal | undefined)[] = [];
    for (const a of args) {
      if (a?.d !== 'array') {
        items.push(undefined, undefined);
        continue;
      }
      b.splitInputs.push({ split: sp, input: a });
      items.push(this.part(a, { split: sp, part: 'train' }), this.part(a, { split: sp, part: 'holdout' }));
    }
    return { d: 'tuple', items };
  }

  private randomSplit(e: CallExpr, ds: DArray | undefined, rec: CallRec, b: Body, out: FileData): DVal | undefined {
    if (!ds) return undefined;
    const lengths = rec.args[1] ?? rec.kwargs.get('lengths');
    const n = lengths?.t === 'list' ? lengths.items.length : 2;
    const sp: SplitEvent = { id: ids++, kind: 'random_split', label: 'random_split(...)', path: b.path, span: e.span, seen: new Set(['train', 'holdout']), cv: false };
    out.splits.push(sp);
    b.splitInputs.push({ split: sp, input: ds });
    const items: (DVal | undefined)[] = [];
    for (let i = 0; i < n; i++) {
      const part: Part = i === 0 ? 'train' : 'holdout';
      const p = this.part(ds, { split: sp, part });
      items.push(this.datasetPart(p, b, out, e.span, { part, by: 'split', detail: `part ${i + 1} of \`random_split(...)\` at ${this.place(b.path, e.span.line)}`, split: sp }));
    }
    return { d: 'tuple', items };
  }

  /** A part of a dataset keeps the dataset's transform: record it as a dataset use with the split's role. */
  private datasetPart(p: DArray, b: Body, out: FileData, span: Span, role: Role): DArray {
    if (p.transformValue) {
      const use: DatasetUse = { path: b.path, span, body: b.name, label: 'random_split(...)', role, transform: this.chain(p.transformValue), overridden: false, fromSplit: true };
      out.datasets.push(use);
      p.dataset = use;
    }
    return p;
  }

  private preprocessorOf(v: Value): Preprocessor | undefined {
    if (v.t !== 'obj') return undefined;
    const hit = this.preByObj.get(v);
    if (hit) return hit;
    let pre: Preprocessor | undefined;
    if (v.q in PREPROCESSORS) pre = { type: shortName(v.q), learns: PREPROCESSORS[v.q], fits: [] };
    else if (PIPELINES.has(v.q)) {
      // a pipeline of preprocessing steps only (no final model) is itself a preprocessor
      // make_pipeline(a, b) / make_column_transformer((a, cols), ...) / Pipeline([(name, a), ...]) / ColumnTransformer([(name, a, cols)])
      const pairs = v.q === 'sklearn.pipeline.make_pipeline' ? v.args : v.q === 'sklearn.compose.make_column_transformer' ? v.args.map((s) => (s.t === 'list' ? s.items[0] : s))
        : (v.args[0]?.t === 'list' ? v.args[0].items.map((s) => (s.t === 'list' ? s.items[1] : s)) : []);
      // 'passthrough' and 'drop' learn nothing
      const steps = pairs.filter((s) => !(s && s.t === 'str' && (s.v === 'passthrough' || s.v === 'drop')));
      const kinds = steps.map((s) => (s && s.t === 'obj' && s.q in PREPROCESSORS ? s.q : undefined));
      if (steps.length && kinds.every((k) => k !== undefined)) {
        pre = { type: `${v.q.includes('olumn') ? 'ColumnTransformer' : 'Pipeline'}(${kinds.map((k) => shortName(k!)).join(', ')})`, learns: kinds.some((k) => PREPROCESSORS[k!]), fits: [] };
      }
    }
    if (pre) this.preByObj.set(v, pre);
    return pre;
  }

  private datasetOf(e: CallExpr, rec: CallRec, b: Body, out: FileData): DArray | undefined {
    let r = rec.result;
    if (r.t !== 'obj') return undefined;
    // a helper that returns a DataLoader: the dataset it loads
    if (LOADERS.has(r.q)) r = r.args[0] ?? r.kwargs.get('dataset') ?? UNKNOWN;
    if (r.t !== 'obj') return undefined;
    let tf = r.kwargs.get('transform');
    const pos = TRANSFORM_POSITION[r.q];
    if (!tf && pos !== undefined) tf = r.args[pos];
    if (!tf || tf.t === 'none') return undefined;
    const use: DatasetUse = { path: b.path, span: e.span, body: b.name, label: `${this.text(b.path, e.fn.span, 40)}(...)`, role: this.datasetRole(rec, r), transform: this.chain(tf), overridden: false, fromSplit: false };
    out.datasets.push(use);
    const a = this.freshArray();
    a.dataset = use;
    a.transformValue = tf;
    return a;
  }

  /** `train=False`, `split="val"`, a `val`/`test` folder among the string arguments of the call or of the dataset. */
  private datasetRole(rec: CallRec, r: Extract<Value, { t: 'obj' }>): Role | undefined {
    // CIFAR10(root, False, ...): `train` is the second positional parameter of the torchvision datasets that have it
    const positionalTrain = TRANSFORM_POSITION[r.q] === 2 ? r.args[1] : undefined;
    for (const t of [r.kwargs.get('train'), rec.kwargs.get('train'), positionalTrain]) {
      if (t?.t === 'bool') return { part: t.v ? 'train' : 'holdout', by: 'dataset-argument', detail: `train=${t.v ? 'True' : 'False'}` };
    }
    const strs: string[] = [];
    for (const v of [...rec.args, ...rec.kwargs.values(), ...r.args, ...r.kwargs.values()]) {
      const s = str(v);
      if (s !== undefined) strs.push(s);
    }
    const parts = new Set<Part>();
    let detail = '';
    for (const s of strs) {
      // the split folder sits at the end of a dataset root (`data/val`, `crops/test/images`); earlier folders such as
      // `/dev/shm` or a user called `test` say nothing about the split
      const segs = s.split(/[\\/]/).filter(Boolean).slice(-2);
      for (const seg of segs) {
        const p = seg.length <= 24 ? partFromWords(seg, true) : undefined;
        if (p) {
          parts.add(p);
          detail ||= `"${s}"`;
        }
      }
    }
    if (parts.size === 1) return { part: [...parts][0], by: 'dataset-argument', detail };
    return undefined;
  }

  /** Flattens a transform value (Compose, nested Compose, a lone transform) into its steps. */
  chain(v: Value): TransformChain {
    const steps: TransformStep[] = [];
    let complete = true;
    const visit = (x: Value) => {
      if (x.t === 'list') return x.items.forEach(visit);
      if (x.t !== 'obj') {
        complete = false;
        return;
      }
      const name = transformName(x.q);
      if (name === 'Compose') {
        const inner = x.args[0] ?? x.kwargs.get('transforms');
        if (!inner) complete = false;
        else visit(inner);
        return;
      }
      if (!name) {
        complete = false;
        return;
      }
      steps.push({ name, q: x.q, site: x.site, value: x });
    };
    visit(v);
    return { site: v.t === 'obj' ? v.site : undefined, steps, complete };
  }

  // ---------- conclusions of one body ----------

  private conclude(b: Body, out: FileData, fitsBefore: number): void {
    const splitDone = (s: SplitEvent) => s.seen.has('train') && s.seen.has('holdout');
    const leaks = new Set<string>();
    const addSplitLeak = (fit: FitEvent, split: SplitEvent) => {
      const k = `${fit.id}:${split.id}`;
      if (leaks.has(k) || !fit.learns) return;
      leaks.add(k);
      out.splitLeaks.push({ fit, split });
    };
    // a split of data already scaled with statistics of those same rows
    for (const { split, input } of b.splitInputs) {
      if (!splitDone(split)) continue;
      for (const f of input.scaledBy) if (covers(f.rows, input.rows)) addSplitLeak(f, split);
    }
    // statistics of all rows applied to rows a split holds out
    for (const { fits, rows } of b.applied) {
      for (const f of fits) {
        if (f.rows.root !== rows.root || rows.segs.length <= f.rows.segs.length || !prefix(f.rows.segs, rows.segs)) continue;
        const seg = rows.segs[f.rows.segs.length];
        if (seg.part === 'holdout' && splitDone(seg.split)) addSplitLeak(f, seg.split);
      }
    }
    for (const cv of b.cvUses) {
      for (const f of cv.scaledBy) {
        if (f.learns && covers(f.rows, cv.rows) && !out.cvLeaks.some((l) => l.fit === f && l.cv === cv)) out.cvLeaks.push({ fit: f, cv });
      }
    }
    // fits on held-out rows
    for (const f of out.fits.slice(fitsBefore)) {
      if (f.kind === 'stats' || !f.learns) continue;
      const role = this.roleOfFit(f, splitDone);
      if (role?.part !== 'holdout') continue;
      const trainFit = this.earlierTrainFit(f, out, fitsBefore, splitDone);
      out.holdoutFits.push({ fit: f, role, trainFit });
    }
  }

  private roleOfFit(f: FitEvent, splitDone: (s: SplitEvent) => boolean): Role | undefined {
    const segs = f.rows.segs.filter((s) => splitDone(s.split));
    const h = segs.find((s) => s.part === 'holdout');
    if (h) return { part: 'holdout', by: 'split', detail: `the held-out part of \`${h.split.label}\` (${this.place(h.split.path, h.split.span.line)})`, split: h.split };
    if (segs.length) return { part: 'train', by: 'split', detail: `the training part of \`${segs[segs.length - 1].split.label}\``, split: segs[segs.length - 1].split };
    if (f.rows.segs.length === 0 && f.dataName) {
      const p = partFromWords(f.dataName);
      if (p) return { part: p, by: 'name', detail: `the name \`${f.dataName}\`` };
    }
    return undefined;
  }

  private earlierTrainFit(f: FitEvent, out: FileData, fitsBefore: number, splitDone: (s: SplitEvent) => boolean): FitEvent | undefined {
    const all = out.fits.slice(fitsBefore);
    const i = all.indexOf(f);
    for (let j = i - 1; j >= 0; j--) {
      const g = all[j];
      if (g.pre !== f.pre || g.kind === 'stats') continue;
      const sameName = g.receiverName !== undefined && g.receiverName === f.receiverName;
      return sameName && this.roleOfFit(g, splitDone)?.part === 'train' ? g : undefined;
    }
    return undefined;
  }
}

function paramNames(s: DefStmt): string[] {
  return s.params.map((p) => p.name).filter((n, i) => !(i === 0 && (n === 'self' || n === 'cls')));
}

function prefix(a: Seg[], b: Seg[]): boolean {
  return a.every((s, i) => b[i] && b[i].split === s.split && b[i].part === s.part);
}

/** The fitted rows include every row of `rows` (same population, and `rows` lies inside the fitted part). */
function covers(fit: Rows, rows: Rows): boolean {
  return fit.root === rows.root && fit.segs.length <= rows.segs.length && prefix(fit.segs, rows.segs);
}

/** A reduction whose statistics are taken over the rows: no axis (all values), axis 0, or a tuple holding 0. */
function overRows(axis: Value | undefined, given: boolean): boolean {
  if (!given || !axis || axis.t === 'none') return true;
  const n = num(axis);
  if (n !== undefined) return n === 0;
  if (axis.t === 'list') return axis.items.some((x) => num(x) === 0);
  return false;
}

/** A structural key of a slice bound, so `[:n_train]` and `[n_train:]` meet; undefined when not simple. */
function exprKey(e: Expr): string | undefined {
  switch (e.k) {
    case 'name': return e.id;
    case 'num': return e.raw;
    case 'attr': { const o = exprKey(e.obj); return o === undefined ? undefined : `${o}.${e.attr}`; }
    case 'unary': { const o = exprKey(e.operand); return o === undefined ? undefined : `${e.op}${o}`; }
    case 'bin': {
      const l = exprKey(e.left);
      const r = exprKey(e.right);
      return l === undefined || r === undefined ? undefined : `${l} ${e.op} ${r}`;
    }
    case 'call': {
      const f = exprKey(e.fn);
      const as = e.args.map(exprKey);
      if (f === undefined || as.some((a) => a === undefined) || e.kwargs.length) return undefined;
      return `${f}(${as.join(', ')})`;
    }
    default: return undefined;
  }
}

/** How a message says why data counts as held out: `the held-out part of train_test_split(...) (train.py:40)`. */
export function roleText(role: Role): string {
  switch (role.by) {
    case 'split': return role.detail;
    case 'dataset-argument': return `${role.part === 'holdout' ? 'held out' : 'training data'} by its argument ${role.detail}`;
    case 'name': return `${role.part === 'holdout' ? 'held out' : 'training data'} judging only by ${role.detail}`;
  }
}

/** The mean and std constants of a torchvision Normalize step, folded; undefined when not constant. */
export function normalizeConstants(step: TransformStep): { mean: number[]; std: number[] } | undefined {
  const v = step.value;
  const vec = (x: Value | undefined): number[] | undefined => {
    if (!x) return undefined;
    if (x.t === 'list') {
      const ns = x.items.map(num);
      return ns.every((n) => n !== undefined) ? (ns as number[]) : undefined;
    }
    const n = num(x);
    return n === undefined ? undefined : [n];
  };
  const mean = vec(v.args[0] ?? v.kwargs.get('mean'));
  const std = vec(v.args[1] ?? v.kwargs.get('std'));
  return mean && std ? { mean, std } : undefined;
}

/**
 * `if p is None:` / `if not p:` on a parameter `p` (its body runs only without it), or `if p is not None:` (its
 * else branch does): the idiom of helpers that fit a preprocessor unless the caller hands one in.
 */
function noneGuard(test: Expr, params: Map<string, number>): { param: string; negated: boolean } | undefined {
  if (test.k === 'unary' && test.op === 'not' && test.operand.k === 'name' && params.has(test.operand.id)) return { param: test.operand.id, negated: false };
  if (test.k !== 'cmp' || test.ops.length !== 1 || (test.ops[0] !== 'is' && test.ops[0] !== 'is not' && test.ops[0] !== '==' && test.ops[0] !== '!=')) return undefined;
  const [l, r] = test.operands;
  const name = l.k === 'name' && r.k === 'none' ? l.id : r.k === 'name' && l.k === 'none' ? r.id : undefined;
  if (name === undefined || !params.has(name)) return undefined;
  return { param: name, negated: test.ops[0] === 'is not' || test.ops[0] === '!=' };
}
