// Random keep/drop masks in the functions forward runs: where a Bernoulli mask is multiplied into activations, whether
// the product is rescaled by the keep probability, and whether it only runs in training. A small def-use view over the
// traced function bodies; callees are the interpreter's resolved names, never the text of the call.
import type { CallExpr, Expr, Span, Stmt } from '../ir';
import { exprChildren, stmtBlocks, stmtExprs, walkExpr, walkStmts } from '../ir';
import type { Interp } from '../interp';
import type { FuncInfo } from '../values';
import { tensorCallName, type ModelGraph, type ModelGraphs } from './model-graph';

/** Library calls whose result is already a 0/1 mask. */
const BERNOULLI = new Set(['torch.bernoulli', 'tensor.bernoulli', 'tensor.bernoulli_', 'torch.Tensor.bernoulli_', 'torch.Tensor.bernoulli']);
/** Library calls that draw uniform noise, a mask once compared with a threshold. */
const UNIFORM = new Set(['torch.rand', 'torch.rand_like', 'tensor.uniform_', 'torch.Tensor.uniform_']);
/** Tensor methods that keep a mask a mask (dtype, device, shape changes). */
const PRESERVE = new Set(['float', 'half', 'double', 'bool', 'byte', 'int', 'long', 'to', 'type', 'type_as', 'detach', 'cuda', 'cpu', 'clone', 'expand', 'expand_as', 'repeat', 'view', 'view_as', 'reshape', 'unsqueeze', 'squeeze', 'contiguous']);
const DIVIDE_METHODS = new Set(['div', 'div_', 'true_divide', 'true_divide_']);
const MUL_METHODS = new Set(['mul', 'mul_', 'multiply']);
/** Local names that, by convention, carry the module's training flag into a helper. */
const TRAINING_NAMES = new Set(['training', 'is_training', 'train', 'train_mode']);

export interface MaskApplication {
  path: string;
  fn: FuncInfo;
  /** The multiplication (`x * mask`, `x.mul(mask)`, `x *= mask`). */
  span: Span;
  /** Where the mask is made: the mask operand, or the expression its name was bound to. */
  maskSpan: Span;
  /** The kept values are divided by the keep probability somewhere on the chain (mask, activation or product). */
  rescaled: boolean;
  /** The multiplication only runs in training: inside `if self.training`, after `if not self.training: return`. */
  gated: boolean;
}

interface Info {
  mask: boolean;
  rescaled: boolean;
}

/** Def-use facts of one function body. */
class FnFlow {
  private readonly defs = new Map<string, Expr[]>();
  /** In-place updates of a name: `m /= keep`, `m.div_(keep)`, `m.bernoulli_(keep)`. */
  private readonly inplace = new Map<string, ('div' | 'mask')[]>();
  private readonly parents = new Map<Expr, Expr>();
  private readonly stmtOf = new Map<Expr, Stmt>();
  private readonly visiting = new Set<string>();

  constructor(readonly fn: FuncInfo, readonly body: readonly Stmt[], private readonly qOf: (c: CallExpr) => string | undefined) {
    walkStmts(body, (s) => {
      if (s.k === 'def' || s.k === 'class') return false;
      for (const e of stmtExprs(s)) this.index(e, s);
      if (s.k === 'assign') for (const t of s.targets) if (t.k === 'name') this.def(t.id, s.value);
      if (s.k === 'augassign' && s.target.k === 'name') {
        if (s.op === '/=') this.update(s.target.id, 'div');
        else if (s.op === '*=' && this.isReciprocal(s.value)) this.update(s.target.id, 'div');
      }
      if (s.k === 'expr' && s.value.k === 'call' && s.value.fn.k === 'attr' && s.value.fn.obj.k === 'name') {
        const name = s.value.fn.obj.id;
        const m = s.value.fn.attr;
        if (DIVIDE_METHODS.has(m) || (MUL_METHODS.has(m) && s.value.args[0] && this.isReciprocal(s.value.args[0]))) this.update(name, 'div');
        else if (BERNOULLI.has(this.qOf(s.value) ?? '')) this.update(name, 'mask');
      }
      return undefined;
    });
  }

  private index(root: Expr, s: Stmt): void {
    walkExpr(root, (e) => {
      this.stmtOf.set(e, s);
      for (const c of exprChildren(e)) this.parents.set(c, e);
      if (e.k === 'walrus') this.def(e.target, e.value);
    });
  }

  private def(name: string, e: Expr): void {
    this.defs.set(name, [...(this.defs.get(name) ?? []), e]);
  }

  private update(name: string, kind: 'div' | 'mask'): void {
    this.inplace.set(name, [...(this.inplace.get(name) ?? []), kind]);
  }

  /** `1 / keep`, `1.0 / (1 - p)`, or a name bound only to such. */
  isReciprocal(e: Expr, depth = 0): boolean {
    if (depth > 8) return false;
    if (e.k === 'bin' && e.op === '/' && e.left.k === 'num' && e.left.value === 1) return true;
    if (e.k === 'name') {
      const ds = this.defs.get(e.id);
      return !!ds && ds.length > 0 && ds.every((d) => this.isReciprocal(d, depth + 1));
    }
    return false;
  }

  /**
   * A factor that can be the 1/(1-p) rescale when it multiplies a masked product: a reciprocal, a number above 1, or
   * a module attribute (`self.scale`, set in `__init__`) whose meaning the body does not show; unsure counts as yes.
   */
  private isScaleFactor(e: Expr): boolean {
    if (this.isReciprocal(e)) return true;
    if (e.k === 'num') return e.value > 1;
    return e.k === 'attr' && e.obj.k === 'name';
  }

  private isUniform(e: Expr, depth = 0): boolean {
    if (depth > 8) return false;
    if (e.k === 'call') {
      if (UNIFORM.has(this.qOf(e) ?? '')) return true;
      if (e.fn.k === 'attr' && PRESERVE.has(e.fn.attr)) return this.isUniform(e.fn.obj, depth + 1);
      return false;
    }
    if (e.k === 'name') return (this.defs.get(e.id) ?? []).some((d) => this.isUniform(d, depth + 1));
    return false;
  }

  /** Whether `e` evaluates to a keep/drop mask, and whether that mask is already rescaled. */
  info(e: Expr, depth = 0): Info | undefined {
    if (depth > 12) return undefined;
    switch (e.k) {
      case 'call': {
        if (BERNOULLI.has(this.qOf(e) ?? '')) return { mask: true, rescaled: false };
        if (e.fn.k === 'attr') {
          const inner = this.info(e.fn.obj, depth + 1);
          if (inner?.mask) {
            if (PRESERVE.has(e.fn.attr)) return inner;
            if (DIVIDE_METHODS.has(e.fn.attr)) return { mask: true, rescaled: true };
            if (MUL_METHODS.has(e.fn.attr) && e.args[0] && this.isReciprocal(e.args[0])) return { mask: true, rescaled: true };
          }
        }
        return undefined;
      }
      case 'cmp':
        if (e.ops.length === 1 && ['<', '>', '<=', '>='].includes(e.ops[0]) && e.operands.some((o) => this.isUniform(o))) return { mask: true, rescaled: false };
        return undefined;
      case 'bin': {
        if (e.op === '/') {
          const l = this.info(e.left, depth + 1);
          return l?.mask ? { mask: true, rescaled: true } : undefined;
        }
        if (e.op === '*') {
          const l = this.info(e.left, depth + 1);
          const r = this.info(e.right, depth + 1);
          if (l?.mask && r?.mask) return { mask: true, rescaled: l.rescaled || r.rescaled };
          if (l?.mask && this.isReciprocal(e.right)) return { mask: true, rescaled: true };
          if (r?.mask && this.isReciprocal(e.left)) return { mask: true, rescaled: true };
        }
        return undefined;
      }
      case 'cond': {
        const a = this.info(e.body, depth + 1);
        const b = this.info(e.orelse, depth + 1);
        if (a?.mask || b?.mask) return { mask: true, rescaled: (!a?.mask || a.rescaled) && (!b?.mask || b.rescaled) };
        return undefined;
      }
      case 'name': {
        if (this.visiting.has(e.id)) return undefined;
        this.visiting.add(e.id);
        try {
          const ups = this.inplace.get(e.id) ?? [];
          const found = (this.defs.get(e.id) ?? []).map((d) => this.info(d, depth + 1)).filter((x): x is Info => !!x?.mask);
          if (!found.length && !ups.includes('mask')) return undefined;
          return { mask: true, rescaled: ups.includes('div') || (found.length > 0 && found.every((f) => f.rescaled)) };
        } finally {
          this.visiting.delete(e.id);
        }
      }
      default: return undefined;
    }
  }

  /** The expression that made the mask `e` refers to (following names to their mask-valued binding). */
  origin(e: Expr, depth = 0): Expr {
    if (e.k !== 'name' || depth > 8) return e;
    const d = (this.defs.get(e.id) ?? []).find((x) => this.info(x)?.mask);
    return d ? this.origin(d, depth + 1) : e;
  }

  /** `e` divides by something (or multiplies by a reciprocal): `x / keep`, `x * (1 / keep)`, `x.div(keep)`. */
  private divides(e: Expr, depth = 0): boolean {
    if (depth > 8) return false;
    if (e.k === 'bin' && e.op === '/') return true;
    if (e.k === 'bin' && e.op === '*') return this.isScaleFactor(e.left) || this.isScaleFactor(e.right) || this.divides(e.left, depth + 1) || this.divides(e.right, depth + 1);
    if (e.k === 'call' && e.fn.k === 'attr' && (DIVIDE_METHODS.has(e.fn.attr) || (MUL_METHODS.has(e.fn.attr) && e.args[0] && this.isReciprocal(e.args[0])))) return true;
    if (e.k === 'name') {
      if ((this.inplace.get(e.id) ?? []).includes('div')) return true;
      return (this.defs.get(e.id) ?? []).some((d) => this.divides(d, depth + 1));
    }
    return false;
  }

  /** The product is divided further up its expression, or in the name it is stored in. */
  private rescaledAbove(site: Expr): boolean {
    let cur: Expr = site;
    for (let p = this.parents.get(cur); p; cur = p, p = this.parents.get(cur)) {
      if (p.k === 'bin' && p.op === '/' && p.left === cur) return true;
      if (p.k === 'bin' && p.op === '*') {
        const other = p.left === cur ? p.right : p.left;
        if (this.isScaleFactor(other)) return true;
        continue;
      }
      if (p.k === 'attr' && p.obj === cur) {
        const call = this.parents.get(p);
        if (call?.k === 'call' && call.fn === p) {
          if (DIVIDE_METHODS.has(p.attr) || (MUL_METHODS.has(p.attr) && call.args[0] && this.isReciprocal(call.args[0]))) return true;
          if (PRESERVE.has(p.attr)) {
            cur = p;
            continue;
          }
        }
      }
      break;
    }
    // stored in a name that is divided afterwards: `out = x * mask; out = out / keep` or `out.div_(keep)`
    const s = this.stmtOf.get(site);
    if (s?.k === 'assign' && s.value === cur) {
      for (const t of s.targets) {
        if (t.k !== 'name') continue;
        if ((this.inplace.get(t.id) ?? []).includes('div')) return true;
        if ((this.defs.get(t.id) ?? []).some((d) => d !== cur && this.divides(d) && mentionsName(d, t.id))) return true;
      }
    }
    return false;
  }

  /** `site` is one term of a sum whose other term is multiplied by the complement `1 - mask`. */
  private complementMix(site: Expr): boolean {
    const p = this.parents.get(site);
    if (p?.k !== 'bin' || p.op !== '+') return false;
    const other = p.left === site ? p.right : p.left;
    let hit = false;
    walkExpr(other, (x) => {
      if (x.k === 'bin' && x.op === '-' && x.left.k === 'num' && x.left.value === 1 && this.info(x.right)?.mask) hit = true;
      return !hit;
    });
    return hit;
  }

  /** Multiplications of a mask into something that is not a mask, in this body. */
  applications(): { site: Expr | Stmt; span: Span; mask: Expr; rescaled: boolean }[] {
    const out: { site: Expr | Stmt; span: Span; mask: Expr; rescaled: boolean }[] = [];
    const consider = (site: Expr | Stmt, span: Span, a: Expr, b: Expr) => {
      const ia = this.info(a);
      const ib = this.info(b);
      if (!!ia?.mask === !!ib?.mask) return;
      const [mask, mi, other] = ia?.mask ? [a, ia, b] : [b, ib!, a];
      // a mask times a parameter or buffer (`self.weight * m`, `v * self.v_bias` in a Bernoulli sampler) is not
      // dropout on activations; precision first
      if (other.k === 'attr' && other.obj.k === 'name') return;
      // `m * a + (1 - m) * b` picks each unit from a or b (zoneout, masked mixing): nothing is dropped, so nothing
      // needs the 1/(1-p) rescale
      if (site.k === 'bin' && this.complementMix(site)) return;
      const rescaled = mi.rescaled || this.divides(other) || (site.k !== 'augassign' && this.rescaledAbove(site as Expr));
      out.push({ site, span, mask, rescaled });
    };
    walkStmts(this.body, (s) => {
      if (s.k === 'def' || s.k === 'class') return false;
      if (s.k === 'augassign' && s.op === '*=') {
        const name = s.target.k === 'name' ? s.target.id : undefined;
        const info = this.info(s.value);
        if (info?.mask && !(s.target.k === 'name' && this.info(s.target)?.mask)) {
          out.push({ site: s, span: s.span, mask: s.value, rescaled: info.rescaled || (!!name && (this.inplace.get(name) ?? []).includes('div')) });
        }
      }
      for (const root of stmtExprs(s)) {
        walkExpr(root, (e) => {
          if (e.k === 'bin' && e.op === '*') consider(e, e.span, e.left, e.right);
          else if (e.k === 'call') {
            const q = this.qOf(e);
            if ((q === 'torch.mul' || q === 'torch.multiply') && e.args.length === 2) consider(e, e.span, e.args[0], e.args[1]);
            else if (e.fn.k === 'attr' && MUL_METHODS.has(e.fn.attr) && e.args.length === 1) consider(e, e.span, e.fn.obj, e.args[0]);
          }
        });
      }
      return undefined;
    });
    return out;
  }

  /** Whether code at `span` only runs when the training flag is set (judged inside this body only). */
  gatedHere(span: Span, trainingNames: ReadonlySet<string>): boolean {
    const mentions = (e: Expr) => mentionsTraining(e, trainingNames);
    const inside = (outer: Span) => outer.start <= span.start && span.end <= outer.end;
    let gated = false;
    const visitBlock = (block: readonly Stmt[]): boolean => {
      for (const s of block) {
        if (inside(s.span)) {
          if ((s.k === 'if' || s.k === 'while') && mentions(s.test) && !inside(s.test.span)) return (gated = true);
          for (const e of stmtExprs(s)) {
            if (!inside(e.span)) continue;
            walkExpr(e, (x) => {
              if (x.k === 'cond' && mentions(x.test) && (inside(x.body.span) || inside(x.orelse.span))) gated = true;
              if (x.k === 'boolop' && x.op === 'and' && mentions(x.left) && inside(x.right.span)) gated = true;
              return inside(x.span) ? undefined : false;
            });
          }
          if (gated) return true;
          for (const b of stmtBlocks(s)) if (visitBlock(b)) return true;
          return false;
        }
        // an earlier `if not self.training: return x` leaves only the training path below
        if (s.span.end <= span.start && s.k === 'if' && mentions(s.test) && exits(s.body)) return (gated = true);
      }
      return false;
    };
    visitBlock(this.body);
    return gated;
  }
}

function exits(block: readonly Stmt[]): boolean {
  const last = block[block.length - 1];
  return !!last && (last.k === 'return' || (last.k === 'other' && last.what === 'raise_statement'));
}

function mentionsName(e: Expr, name: string): boolean {
  let hit = false;
  walkExpr(e, (x) => {
    if (x.k === 'name' && x.id === name) hit = true;
  });
  return hit;
}

function mentionsTraining(e: Expr, names: ReadonlySet<string>): boolean {
  let hit = false;
  walkExpr(e, (x) => {
    if ((x.k === 'attr' && x.attr === 'training') || (x.k === 'name' && names.has(x.id))) hit = true;
  });
  return hit;
}

/**
 * Mask multiplications in the functions `g`'s forward ran (forward, methods and helpers it called). A site is gated
 * when its own body checks the training flag around or before it, or when every call that reached its function was
 * itself gated in the caller.
 */
export function maskApplications(g: ModelGraph, interp: Interp): MaskApplication[] {
  const qByCall = new Map<CallExpr, string>();
  const fns = new Map<FuncInfo['stmt'], FuncInfo>();
  const fwd = interp.classMember(g.cls, 'forward');
  if (fwd?.value.t === 'func') fns.set(fwd.value.fn.stmt, fwd.value.fn);
  for (const c of g.calls) {
    const q = tensorCallName(c);
    if (q && !qByCall.has(c.call)) qByCall.set(c.call, q);
    if (c.fn) fns.set(c.fn.stmt, c.fn);
  }
  const qOf = (c: CallExpr) => qByCall.get(c);
  const flows = new Map<FuncInfo['stmt'], FnFlow>();
  const flowOf = (fn: FuncInfo) => {
    let f = flows.get(fn.stmt);
    if (!f) {
      f = new FnFlow(fn, fn.stmt.body, qOf);
      flows.set(fn.stmt, f);
    }
    return f;
  };
  // which traced calls entered which function (direct calls, or a user module's forward through module call)
  const callersOf = (fn: FuncInfo) => g.calls.filter((c) => {
    if (c.callee.t === 'func') return c.callee.fn.stmt === fn.stmt;
    if (c.callee.t === 'module' && c.callee.m.cls && fn.name === 'forward') {
      const f = interp.classMember(c.callee.m.cls, 'forward');
      return f?.value.t === 'func' && f.value.fn.stmt === fn.stmt;
    }
    return false;
  });
  /** Parameters of `fn` that some caller feeds with an expression mentioning the training flag. */
  const trainingParams = (fn: FuncInfo): Set<string> => {
    const names = new Set(TRAINING_NAMES);
    const params = fn.stmt.params.filter((p) => p.kind === 'normal' || p.kind === 'kwonly');
    const offset = fn.owner && params[0] && !fn.stmt.decorators.some((d) => d.k === 'name' && d.id === 'staticmethod') ? 1 : 0;
    for (const c of callersOf(fn)) {
      c.call.args.forEach((a, i) => {
        const p = params[i + offset];
        if (p && mentionsTraining(a, TRAINING_NAMES)) names.add(p.name);
      });
      for (const k of c.call.kwargs) if (mentionsTraining(k.value, TRAINING_NAMES)) names.add(k.name);
    }
    return names;
  };
  const gatedMemo = new Map<FuncInfo['stmt'], boolean>();
  const callGated = (fn: FuncInfo, depth: number): boolean => {
    if (depth > 6) return false;
    const hit = gatedMemo.get(fn.stmt);
    if (hit !== undefined) return hit;
    gatedMemo.set(fn.stmt, false);
    const callers = callersOf(fn).filter((c) => c.fn);
    const r = callers.length > 0 && callers.every((c) => flowOf(c.fn!).gatedHere(c.call.span, trainingParams(c.fn!)) || callGated(c.fn!, depth + 1));
    gatedMemo.set(fn.stmt, r);
    return r;
  };
  const out: MaskApplication[] = [];
  for (const fn of fns.values()) {
    const flow = flowOf(fn);
    const apps = flow.applications();
    if (!apps.length) continue;
    const names = trainingParams(fn);
    for (const a of apps) {
      out.push({
        path: fn.path, fn, span: a.span, maskSpan: flow.origin(a.mask).span, rescaled: a.rescaled,
        gated: flow.gatedHere(a.span, names) || callGated(fn, 0),
      });
    }
  }
  return out;
}

const byPathCache = new WeakMap<ModelGraphs, Map<string, MaskApplication[]>>();

/**
 * Mask multiplications located in `path`, over every model of the workspace: a function that runs under several
 * models (a block alone and inside a network) is one site, gated if any model's callers gate it. Built once.
 */
export function maskApplicationsIn(models: ModelGraphs, interp: Interp, path: string): MaskApplication[] {
  let index = byPathCache.get(models);
  if (!index) {
    const bySite = new Map<string, MaskApplication>();
    for (const g of models.all()) {
      for (const a of maskApplications(g, interp)) {
        const key = `${a.path}\0${a.span.start}\0${a.span.end}`;
        const cur = bySite.get(key);
        if (cur) {
          cur.gated ||= a.gated;
          cur.rescaled ||= a.rescaled;
        } else bySite.set(key, { ...a });
      }
    }
    index = new Map();
    for (const a of bySite.values()) index.set(a.path, [...(index.get(a.path) ?? []), a]);
    byPathCache.set(models, index);
  }
  return index.get(path) ?? [];
}
