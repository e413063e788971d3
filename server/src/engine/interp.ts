// A bounded abstract interpreter over the IR: folds constants, resolves names across files, builds nn.Module
// instances from __init__ and traces tensors through forward. It never runs user code and gives up as `unknown`.
import * as posix from 'node:path/posix';
import type { CallExpr, ClassStmt, DefStmt, Expr, Stmt } from './ir';
import { walkExpr, walkStmts } from './ir';
import type { Workspace } from './workspace';
import { loadConfig } from './configs';
import {
  CHANNEL_PRESERVING, CHANNEL_PRESERVING_FUNCTIONS, CONTAINERS, canonical, familyOf, isKnownTorchClass, isTorchLayerClass, isTorchSubclass, layerSpec,
} from './torch-catalog';
import { NONE, UNKNOWN, num, str, truthy, type ClassInfo, type FuncInfo, type ModuleInst, type Scope, type Value } from './values';

const MAX_CALL_DEPTH = 16;
const MAX_UNROLL = 256;
const MAX_STEPS = 200_000;
/** Library calls that read a config file the workspace may hold (asked on every library call: built once). */
const CONFIG_LOADERS = new Set(['yaml.safe_load', 'yaml.load', 'yaml.full_load', 'json.load', 'json.loads', 'tomllib.load', 'tomllib.loads', 'toml.load', 'tomli.load', 'omegaconf.OmegaConf.load']);

/** What forward tracing records for one root model. */
export interface FlowRecorder {
  feeds: [ModuleInst, ModuleInst][];
  /** For each called leaf, the tensor it was called on (channels, rank) the last time. */
  inputs: Map<ModuleInst, Extract<Value, { t: 'tensor' }>>;
  called: Set<ModuleInst>;
  /** Layers whose output was an operand of arithmetic (`a + b`, `out += x`) while tracing. */
  operands?: Set<ModuleInst>;
}

function noteOperands(frame: Frame, ...vals: Value[]): void {
  const rec = frame.recorder;
  if (!rec) return;
  for (const v of vals) if (isTensor(v)) for (const m of v.from) (rec.operands ??= new Set()).add(m);
}

export interface Frame {
  scope: Scope;
  path: string;
  /** The statement list being executed (argparse collects add_argument calls from it). */
  body: readonly Stmt[];
  self?: Value;
  cls?: ClassInfo;
  returned?: Value;
  done: boolean;
  depth: number;
  recorder?: FlowRecorder;
  /** The user function whose body this frame executes (unset for module and class bodies). */
  fn?: FuncInfo;
}

/** Observers let views see calls as the interpreter evaluates them, without a second walker. */
export interface CallObserver {
  (call: CallExpr, callee: Value, args: Value[], kwargs: Map<string, Value>, frame: Frame, result: Value): void;
}

let nextModuleId = 1;

export function newModule(kind: ModuleInst['kind'], type: string): ModuleInst {
  return { id: nextModuleId++, kind, type, args: new Map(), given: new Set(), children: [], attrs: new Map() };
}

function isTensor(v: Value): v is Extract<Value, { t: 'tensor' }> {
  return v.t === 'tensor';
}

const freshTensor = (ch?: number, rank?: number): Value => ({ t: 'tensor', from: [], ch, rank });

export function mergeValues(a: Value, b: Value): Value {
  if (a === b) return a;
  if (a.t === 'tensor' && b.t === 'tensor') {
    const from = [...new Set([...a.from, ...b.from])];
    return { t: 'tensor', from, ch: a.ch === b.ch ? a.ch : undefined, rank: a.rank === b.rank ? a.rank : undefined };
  }
  if ((a.t === 'num' || a.t === 'str' || a.t === 'bool') && a.t === b.t && a.v === b.v) return a;
  if (a.t === 'none' && b.t === 'none') return a;
  if (a.t === 'module' && b.t === 'module' && a.m === b.m) return a;
  return UNKNOWN;
}

export class Interp {
  private readonly moduleScopes = new Map<string, Scope>();
  private readonly classInfos = new Map<ClassStmt, ClassInfo>();
  private readonly funcInfos = new Map<DefStmt, FuncInfo>();
  private readonly evaluating = new Set<string>();
  private steps = 0;
  readonly observers: CallObserver[] = [];

  constructor(readonly ws: Workspace) {}

  // ---------- scopes and names ----------

  moduleScope(path: string): Scope {
    const hit = this.moduleScopes.get(path);
    if (hit) return hit;
    const file = this.ws.get(path);
    const body = file?.facts.ir.body ?? [];
    // the last top-level binding of each name wins; names bound in loops or branches are also seen (last one)
    const bindings = new Map<string, Stmt>();
    const bindName = (e: Expr, s: Stmt) => {
      if (e.k === 'name') bindings.set(e.id, s);
      else if (e.k === 'tuple' || e.k === 'list') e.items.forEach((i) => bindName(i, s));
    };
    const visitTop = (stmts: readonly Stmt[]) => {
      for (const s of stmts) {
        switch (s.k) {
          case 'assign': s.targets.forEach((t) => bindName(t, s)); break;
          case 'import': for (const n of s.names) bindings.set(n.alias ?? n.module.split('.')[0], s); break;
          case 'from': for (const n of s.names) bindings.set(n.alias ?? n.name, s); break;
          case 'def': case 'class': bindings.set(s.name, s); break;
          case 'if': visitTop(s.body); visitTop(s.orelse); break;
          case 'try': visitTop(s.body); s.handlers.forEach(visitTop); visitTop(s.orelse); break;
          case 'with': visitTop(s.body); break;
          default: break;
        }
      }
    };
    visitTop(body);
    const scope: Scope = { path, vars: new Map(), parent: null };
    scope.vars.set('__file__', { t: 'str', v: path });
    scope.vars.set('__name__', { t: 'str', v: '__main__' });
    scope.lookupLazy = (name: string) => {
      const s = bindings.get(name);
      if (!s) return undefined;
      const key = `${path}\0${name}`;
      if (this.evaluating.has(key)) return UNKNOWN;
      this.evaluating.add(key);
      try {
        const v = this.bindingValue(path, scope, body, s, name);
        scope.vars.set(name, v);
        return v;
      } finally {
        this.evaluating.delete(key);
      }
    };
    this.moduleScopes.set(path, scope);
    return scope;
  }

  private bindingValue(path: string, scope: Scope, body: readonly Stmt[], s: Stmt, name: string): Value {
    const frame: Frame = { scope, path, body, done: false, depth: 0 };
    switch (s.k) {
      case 'def': return { t: 'func', fn: this.funcInfo(s, scope, path) };
      case 'class': return { t: 'class', cls: this.classInfo(s, scope, path) };
      case 'import': {
        for (const n of s.names) {
          if (n.alias === name) return this.importModule(path, n.module, 0);
          if (!n.alias && n.module.split('.')[0] === name) return this.importModule(path, n.module.split('.')[0], 0);
        }
        return UNKNOWN;
      }
      case 'from': {
        const n = s.names.find((x) => (x.alias ?? x.name) === name);
        if (!n) return UNKNOWN;
        return this.importMember(path, s.module, s.level, n.name);
      }
      case 'assign': {
        const v = this.evalExpr(s.value, frame);
        for (const t of s.targets) {
          const got = destructure(t, v, name);
          if (got) return got;
        }
        return UNKNOWN;
      }
      default: return UNKNOWN;
    }
  }

  /** `import a.b` binds `a`; an external module is an `ext` value, a workspace module a `str` path marker. */
  private importModule(fromPath: string, module: string, level: number): Value {
    const file = this.ws.resolveModule(fromPath, module, level);
    if (file) return { t: 'obj', q: '<module>', args: [], kwargs: new Map(), state: new Map([['__path__', { t: 'str', v: file }]]) };
    return { t: 'ext', q: canonical(module) };
  }

  private importMember(fromPath: string, module: string, level: number, member: string): Value {
    const file = this.ws.resolveModule(fromPath, module, level);
    if (file) {
      const scope = this.moduleScope(file);
      const v = this.lookup(scope, member);
      if (v.t !== 'unknown') return v;
      // `from pkg import submodule`
      const sub = this.ws.resolveModule(fromPath, module ? `${module}.${member}` : member, level);
      if (sub) return this.importModule(fromPath, module ? `${module}.${member}` : member, level);
      return v;
    }
    if (level > 0) return UNKNOWN;
    return { t: 'ext', q: canonical(`${module}.${member}`) };
  }

  lookup(scope: Scope, name: string): Value {
    for (let s: Scope | null = scope; s; s = s.parent) {
      const v = s.vars.get(name);
      if (v) return v;
      if (s.lookupLazy) {
        const lv = s.lookupLazy(name);
        if (lv) return lv;
      }
    }
    return { t: 'ext', q: `builtins.${name}` };
  }

  classInfo(stmt: ClassStmt, scope: Scope, path: string): ClassInfo {
    let c = this.classInfos.get(stmt);
    if (!c) {
      c = { name: stmt.name, path, stmt, scope };
      this.classInfos.set(stmt, c);
    }
    return c;
  }

  funcInfo(stmt: DefStmt, scope: Scope, path: string, owner?: ClassInfo): FuncInfo {
    let f = this.funcInfos.get(stmt);
    if (!f) {
      f = { name: stmt.name, path, stmt, scope, owner };
      this.funcInfos.set(stmt, f);
    }
    return f;
  }

  /** Base classes as values (a user class, or an external name). */
  bases(cls: ClassInfo): Value[] {
    const frame: Frame = { scope: cls.scope, path: cls.path, body: [], done: false, depth: 0 };
    return cls.stmt.bases.map((b) => this.evalExpr(b, frame));
  }

  /** Method resolution order (depth-first, good enough for the single-inheritance code models use). */
  mro(cls: ClassInfo, seen = new Set<ClassInfo>()): ClassInfo[] {
    if (seen.has(cls)) return [];
    seen.add(cls);
    const out = [cls];
    for (const b of this.bases(cls)) if (b.t === 'class') out.push(...this.mro(b.cls, seen));
    return out;
  }

  /** External base classes reached through the hierarchy, e.g. `torch.nn.Module`. */
  externalBases(cls: ClassInfo): string[] {
    const out: string[] = [];
    for (const c of this.mro(cls)) for (const b of this.bases(c)) if (b.t === 'ext') out.push(b.q);
    return out;
  }

  isTorchModuleClass(cls: ClassInfo): boolean {
    return this.externalBases(cls).some((q) => q === 'torch.nn.Module' || CONTAINERS.has(q) || isTorchLayerClass(q) ||
      q === 'lightning.LightningModule' || q === 'pytorch_lightning.LightningModule' || q === 'lightning.pytorch.LightningModule');
  }

  /** `isinstance(m, cls)` for a module the interpreter built; undefined when it cannot tell. */
  moduleIsInstance(m: ModuleInst, cls: Value): boolean | undefined {
    if (cls.t === 'ext') {
      if (m.kind === 'leaf' || m.kind === 'sequential' || m.kind === 'modulelist' || m.kind === 'moduledict') return isTorchSubclass(m.type, cls.q);
      if (m.kind === 'user' && m.cls) {
        const ext = this.externalBases(m.cls);
        if (ext.some((q) => isTorchSubclass(q, cls.q) === true)) return true;
        // a plain nn.Module subclass is no library layer
        return ext.every((q) => q === 'torch.nn.Module') && isKnownTorchClass(cls.q) ? false : undefined;
      }
      return undefined;
    }
    if (cls.t === 'class') {
      if (m.kind === 'user' && m.cls) {
        if (this.mro(m.cls).includes(cls.cls)) return true;
        return this.bases(m.cls).every((b) => b.t === 'ext' || b.t === 'class') ? false : undefined;
      }
      return m.kind === 'leaf' && layerSpec(m.type) ? false : undefined;
    }
    return undefined;
  }

  /** A method (or class attribute) found along the MRO. */
  classMember(cls: ClassInfo, name: string): { value: Value; owner: ClassInfo } | undefined {
    for (const c of this.mro(cls)) {
      for (let i = c.stmt.body.length - 1; i >= 0; i--) {
        const s = c.stmt.body[i];
        if (s.k === 'def' && s.name === name) return { value: { t: 'func', fn: this.funcInfo(s, c.scope, c.path, c) }, owner: c };
        if (s.k === 'assign' && s.targets.some((t) => t.k === 'name' && t.id === name)) {
          const frame: Frame = { scope: c.scope, path: c.path, body: c.stmt.body, done: false, depth: 0 };
          return { value: this.evalExpr(s.value, frame), owner: c };
        }
      }
    }
    return undefined;
  }

  // ---------- statements ----------

  execBody(stmts: readonly Stmt[], frame: Frame): void {
    for (const s of stmts) {
      if (frame.done) return;
      if (++this.steps > MAX_STEPS) {
        frame.done = true;
        return;
      }
      this.execStmt(s, frame);
    }
  }

  execStmt(s: Stmt, frame: Frame): void {
    switch (s.k) {
      case 'expr': this.evalExpr(s.value, frame); return;
      case 'assign': {
        const v = this.evalExpr(s.value, frame);
        for (const t of s.targets) this.assign(t, v, frame);
        return;
      }
      case 'augassign': {
        const cur = this.evalExpr(s.target, frame);
        const rhs = this.evalExpr(s.value, frame);
        noteOperands(frame, cur, rhs);
        if (cur.t === 'list' && s.op === '+=' && rhs.t === 'list') {
          cur.items.push(...rhs.items);
          return;
        }
        if (cur.t === 'module' && this.containerKind(cur.m) === 'modulelist' && s.op === '+=' && rhs.t === 'list') {
          for (const m of rhs.items) if (m.t === 'module') cur.m.children.push([String(cur.m.children.length), m.m]);
          return;
        }
        // an in-place op on a tensor gives a tensor no layer produced directly
        this.assign(s.target, isTensor(cur) || isTensor(rhs) ? freshTensor(isTensor(cur) ? cur.ch : undefined, isTensor(cur) ? cur.rank : undefined) : this.binop(s.op.slice(0, -1), cur, rhs), frame);
        return;
      }
      case 'return':
        frame.returned = s.value ? this.evalExpr(s.value, frame) : NONE;
        frame.done = true;
        return;
      case 'if': {
        const t = truthy(this.evalExpr(s.test, frame));
        if (t === true) this.execBody(s.body, frame);
        else if (t === false) this.execBody(s.orelse, frame);
        else this.execBranches([s.body, s.orelse], frame);
        return;
      }
      case 'for': {
        const it = this.iterate(this.evalExpr(s.iter, frame));
        if (it && it.length <= MAX_UNROLL) {
          for (const item of it) {
            if (frame.done) break;
            this.assign(s.target, item, frame);
            this.execBody(s.body, frame);
          }
        } else {
          this.assign(s.target, UNKNOWN, frame);
          this.execBody(s.body, frame);
        }
        if (!frame.done) this.execBody(s.orelse, frame);
        return;
      }
      case 'while':
        this.evalExpr(s.test, frame);
        this.execBody(s.body, frame);
        return;
      case 'with':
        for (const item of s.items) {
          const v = this.evalExpr(item.ctx, frame);
          if (item.target) this.assign(item.target, v.t === 'obj' && v.q === 'builtins.open' ? v : UNKNOWN, frame);
        }
        this.execBody(s.body, frame);
        return;
      case 'try':
        this.execBody(s.body, frame);
        if (!frame.done) this.execBody(s.orelse, frame);
        if (!frame.done) this.execBody(s.finalbody, frame);
        return;
      case 'def':
        frame.scope.vars.set(s.name, { t: 'func', fn: this.funcInfo(s, frame.scope, frame.path) });
        return;
      case 'class':
        frame.scope.vars.set(s.name, { t: 'class', cls: this.classInfo(s, frame.scope, frame.path) });
        return;
      case 'import':
        for (const n of s.names) {
          const local = n.alias ?? n.module.split('.')[0];
          frame.scope.vars.set(local, this.importModule(frame.path, n.alias ? n.module : local, 0));
        }
        return;
      case 'from':
        for (const n of s.names) frame.scope.vars.set(n.alias ?? n.name, this.importMember(frame.path, s.module, s.level, n.name));
        return;
      default:
        return;
    }
  }

  /** Runs each branch on a copy of the locals and joins them: equal values stay, others become unknown. */
  private execBranches(branches: readonly (readonly Stmt[])[], frame: Frame): void {
    const before = new Map(frame.scope.vars);
    const results: { vars: Map<string, Value>; done: boolean; returned?: Value }[] = [];
    for (const b of branches) {
      frame.scope.vars.clear();
      for (const [k, v] of before) frame.scope.vars.set(k, v);
      frame.done = false;
      frame.returned = undefined;
      this.execBody(b, frame);
      results.push({ vars: new Map(frame.scope.vars), done: frame.done, returned: frame.returned });
    }
    const live = results.filter((r) => !r.done);
    frame.scope.vars.clear();
    const keys = new Set(results.flatMap((r) => [...r.vars.keys()]));
    const pool = live.length ? live : results;
    for (const k of keys) {
      let acc: Value | undefined;
      for (const r of pool) {
        const v = r.vars.get(k) ?? before.get(k);
        if (!v) continue;
        acc = acc === undefined ? v : mergeValues(acc, v);
      }
      if (acc) frame.scope.vars.set(k, acc);
    }
    const rets = results.filter((r) => r.done && r.returned).map((r) => r.returned!);
    if (live.length === 0 && results.length) {
      frame.done = true;
      frame.returned = rets.reduce<Value | undefined>((a, v) => (a ? mergeValues(a, v) : v), undefined);
    } else {
      frame.done = false;
      frame.returned = undefined;
    }
  }

  assign(target: Expr, v: Value, frame: Frame): void {
    switch (target.k) {
      case 'name': frame.scope.vars.set(target.id, v); return;
      case 'tuple': case 'list': {
        const items = this.iterate(v);
        const starAt = target.items.findIndex((t) => t.k === 'star');
        target.items.forEach((t, i) => {
          if (t.k === 'star') {
            this.assign(t.value, items ? { t: 'list', items: items.slice(i, items.length - (target.items.length - i - 1)), tuple: false } : UNKNOWN, frame);
            return;
          }
          const idx = starAt >= 0 && i > starAt && items ? items.length - (target.items.length - i) : i;
          this.assign(t, items && idx < items.length ? items[idx] : UNKNOWN, frame);
        });
        return;
      }
      case 'attr': {
        const obj = this.evalExpr(target.obj, frame);
        this.setAttr(obj, target.attr, v);
        return;
      }
      case 'sub': {
        const obj = this.evalExpr(target.obj, frame);
        const key = this.evalExpr(target.index, frame);
        if (obj.t === 'dict') {
          const k = keyOf(key);
          if (k !== undefined) obj.map.set(k, v);
        } else if (obj.t === 'list') {
          const i = num(key);
          if (i !== undefined && Number.isInteger(i) && obj.items[i < 0 ? obj.items.length + i : i]) obj.items[i < 0 ? obj.items.length + i : i] = v;
        } else if (obj.t === 'module' && this.containerKind(obj.m) === 'moduledict' && v.t === 'module') {
          const k = keyOf(key);
          if (k !== undefined) registerChild(obj.m, k, v.m);
        }
        return;
      }
      default: return;
    }
  }

  setAttr(obj: Value, attr: string, v: Value): void {
    if (obj.t === 'module') {
      if (v.t === 'module') registerChild(obj.m, attr, v.m);
      else {
        const i = obj.m.children.findIndex(([n]) => n === attr);
        if (i >= 0 && v.t === 'none') obj.m.children.splice(i, 1);
        // `m.momentum = 0.01` in an init loop changes what the layer was constructed with
        if (obj.m.kind === 'leaf' && obj.m.args.has(attr)) {
          obj.m.args.set(attr, v);
          obj.m.given.add(attr);
          return;
        }
        obj.m.attrs.set(attr, v);
      }
    } else if (obj.t === 'obj') obj.state.set(attr, v);
  }

  // ---------- expressions ----------

  evalExpr(e: Expr, frame: Frame): Value {
    switch (e.k) {
      case 'num': return { t: 'num', v: e.value, origin: { path: frame.path, line: e.span.line, span: e.span } };
      case 'str': return e.fstring ? this.fstring(e, frame) : { t: 'str', v: e.value, origin: { path: frame.path, line: e.span.line, span: e.span } };
      case 'bool': return { t: 'bool', v: e.value, origin: { path: frame.path, line: e.span.line, span: e.span } };
      case 'none': return NONE;
      case 'name': return this.lookup(frame.scope, e.id);
      case 'attr': return this.getAttr(this.evalExpr(e.obj, frame), e.attr, frame);
      case 'call': return this.evalCall(e, frame);
      case 'list': case 'tuple': case 'set': {
        const items: Value[] = [];
        for (const i of e.items) {
          if (i.k === 'star') {
            const inner = this.iterate(this.evalExpr(i.value, frame));
            if (!inner) return UNKNOWN;
            items.push(...inner);
          } else items.push(this.evalExpr(i, frame));
        }
        return { t: 'list', items, tuple: e.k !== 'list' };
      }
      case 'dict': {
        const map = new Map<string, Value>();
        for (const en of e.entries) {
          if (!en.key) {
            const inner = this.evalExpr(en.value, frame);
            if (inner.t === 'dict') for (const [k, v] of inner.map) map.set(k, v);
            continue;
          }
          const k = keyOf(this.evalExpr(en.key, frame));
          if (k === undefined) return UNKNOWN;
          map.set(k, this.evalExpr(en.value, frame));
        }
        return { t: 'dict', map, origin: { path: frame.path, line: e.span.line } };
      }
      case 'bin': {
        const l = this.evalExpr(e.left, frame);
        const r = this.evalExpr(e.right, frame);
        noteOperands(frame, l, r);
        return this.binop(e.op, l, r);
      }
      case 'unary': {
        const v = this.evalExpr(e.operand, frame);
        if (e.op === 'not') {
          const t = truthy(v);
          return t === undefined ? UNKNOWN : { t: 'bool', v: !t };
        }
        if (isTensor(v)) return freshTensor(v.ch, v.rank);
        const n = num(v);
        if (n === undefined) return UNKNOWN;
        const origin = v.t === 'num' ? v.origin : undefined;
        if (e.op === '-') return { t: 'num', v: -n, origin };
        if (e.op === '+') return { t: 'num', v: n, origin };
        if (e.op === '~') return { t: 'num', v: ~n, origin };
        return UNKNOWN;
      }
      case 'boolop': {
        const l = this.evalExpr(e.left, frame);
        const lt = truthy(l);
        if (lt === undefined) {
          this.evalExpr(e.right, frame);
          return UNKNOWN;
        }
        if (e.op === 'and') return lt ? this.evalExpr(e.right, frame) : l;
        return lt ? l : this.evalExpr(e.right, frame);
      }
      case 'cmp': return this.compare(e.ops, e.operands.map((o) => this.evalExpr(o, frame)));
      case 'sub': return this.subscript(this.evalExpr(e.obj, frame), e.index, frame);
      case 'cond': {
        const t = truthy(this.evalExpr(e.test, frame));
        if (t === true) return this.evalExpr(e.body, frame);
        if (t === false) return this.evalExpr(e.orelse, frame);
        return mergeValues(this.evalExpr(e.body, frame), this.evalExpr(e.orelse, frame));
      }
      case 'comp': return this.comprehension(e, frame);
      case 'walrus': {
        const v = this.evalExpr(e.value, frame);
        frame.scope.vars.set(e.target, v);
        return v;
      }
      case 'lambda': return { t: 'func', fn: { name: '<lambda>', path: frame.path, stmt: lambdaDef(e), scope: frame.scope } };
      case 'star': return this.evalExpr(e.value, frame);
      default: return UNKNOWN;
    }
  }

  /**
   * `f"denseblock{i + 1}"` with constant ints and strings in plain fields; fields that call something (whose
   * evaluation could be seen as a model call) or carry a conversion or format spec stay unknown.
   */
  private fstring(e: Extract<Expr, { k: 'str' }>, frame: Frame): Value {
    if (!e.parts) return UNKNOWN;
    let out = '';
    for (const p of e.parts) {
      if (typeof p === 'string') {
        out += p;
        continue;
      }
      let pure = p.plain;
      if (pure) walkExpr(p.expr, (x) => {
        // true division gives a float, which Python prints as `2.0` where a number here would print `2`
        if (x.k === 'call' || x.k === 'walrus' || x.k === 'lambda' || x.k === 'comp' || x.k === 'unknown' || (x.k === 'bin' && x.op === '/')) pure = false;
        return pure;
      });
      if (!pure) return UNKNOWN;
      const v = this.evalExpr(p.expr, frame);
      if (v.t === 'str') out += v.v;
      else if (v.t === 'num' && Number.isInteger(v.v)) out += String(v.v);
      else return UNKNOWN;
    }
    return { t: 'str', v: out };
  }

  private comprehension(e: Extract<Expr, { k: 'comp' }>, frame: Frame): Value {
    const scope: Scope = { path: frame.path, vars: new Map(), parent: frame.scope };
    const inner: Frame = { ...frame, scope, done: false };
    const out: Value[] = [];
    const dict = new Map<string, Value>();
    const loop = (i: number): boolean => {
      if (i === e.fors.length) {
        for (const c of e.ifs) {
          const t = truthy(this.evalExpr(c, inner));
          if (t === undefined) return false;
          if (!t) return true;
        }
        if (e.kind === 'dict') {
          const k = keyOf(this.evalExpr(e.elt, inner));
          if (k === undefined) return false;
          dict.set(k, this.evalExpr(e.value!, inner));
        } else out.push(this.evalExpr(e.elt, inner));
        return out.length + dict.size <= MAX_UNROLL;
      }
      const items = this.iterate(this.evalExpr(e.fors[i].iter, inner));
      if (!items || items.length > MAX_UNROLL) return false;
      for (const it of items) {
        this.assign(e.fors[i].target, it, inner);
        if (!loop(i + 1)) return false;
      }
      return true;
    };
    if (!loop(0)) return UNKNOWN;
    if (e.kind === 'dict') return { t: 'dict', map: dict };
    return { t: 'list', items: out, tuple: e.kind === 'gen' };
  }

  binop(op: string, a: Value, b: Value): Value {
    if (isTensor(a) || isTensor(b)) {
      const ch = isTensor(a) && isTensor(b) ? (a.ch === b.ch ? a.ch : undefined) : isTensor(a) ? a.ch : (b as { ch?: number }).ch;
      const rank = isTensor(a) ? a.rank : (b as { rank?: number }).rank;
      return freshTensor(op === '@' ? undefined : ch, rank);
    }
    if (a.t === 'list' && b.t === 'list' && op === '+') return { t: 'list', items: [...a.items, ...b.items], tuple: a.tuple };
    if (a.t === 'list' && op === '*' && num(b) !== undefined) {
      const n = num(b)!;
      if (n * a.items.length > MAX_UNROLL) return UNKNOWN;
      return { t: 'list', items: Array.from({ length: Math.max(0, n) }, () => a.items).flat(), tuple: a.tuple };
    }
    if (a.t === 'str' && b.t === 'str' && op === '+') return { t: 'str', v: a.v + b.v };
    if (a.t === 'str' && op === '%') return formatPercent(a.v, b);
    if (op === '/' && (isPathLike(a))) {
      const base = pathOf(a);
      const rest = b.t === 'str' ? b.v : pathOf(b);
      if (base !== undefined && rest !== undefined) return pathValue(posix.join(base, rest));
      return UNKNOWN;
    }
    const x = num(a);
    const y = num(b);
    if (x === undefined || y === undefined) return UNKNOWN;
    const origin = (a.t === 'num' ? a.origin : undefined) ?? (b.t === 'num' ? b.origin : undefined);
    let r: number;
    switch (op) {
      case '+': r = x + y; break;
      case '-': r = x - y; break;
      case '*': r = x * y; break;
      case '/': if (y === 0) return UNKNOWN; r = x / y; break;
      case '//': if (y === 0) return UNKNOWN; r = Math.floor(x / y); break;
      case '%': if (y === 0) return UNKNOWN; r = ((x % y) + y) % y; break;
      case '**': r = x ** y; break;
      case '<<': r = x << y; break;
      case '>>': r = x >> y; break;
      case '&': r = x & y; break;
      case '|': r = x | y; break;
      default: return UNKNOWN;
    }
    return { t: 'num', v: r, origin: origin ? { ...origin, what: undefined } : undefined };
  }

  private compare(ops: string[], vals: Value[]): Value {
    let result = true;
    for (let i = 0; i < ops.length; i++) {
      const a = vals[i];
      const b = vals[i + 1];
      const op = ops[i];
      let r: boolean | undefined;
      if (op === 'is' || op === 'is not' || op === '==' || op === '!=') {
        if (a.t === 'unknown' || b.t === 'unknown' || isTensor(a) || isTensor(b)) r = undefined;
        else if (a.t === 'none' || b.t === 'none') r = a.t === b.t;
        else if ((a.t === 'num' || a.t === 'bool') && (b.t === 'num' || b.t === 'bool')) r = num(a) === num(b);
        else if (a.t === 'str' && b.t === 'str') r = a.v === b.v;
        // `v == "M"` over a cfg list of ints and "M" markers: a number never equals a string in Python
        else if ((a.t === 'str' && (b.t === 'num' || b.t === 'bool')) || (b.t === 'str' && (a.t === 'num' || a.t === 'bool'))) r = false;
        else if (a.t === 'module' && b.t === 'module') r = a.m === b.m;
        else if (a.t === 'ext' && b.t === 'ext') r = a.q === b.q ? true : undefined;
        else if ((a.t === 'module' || a.t === 'class' || a.t === 'func' || a.t === 'list') && (b.t === 'str' || b.t === 'num')) r = false;
        else r = undefined;
        if (r !== undefined && (op === 'is not' || op === '!=')) r = !r;
      } else if (op === 'in' || op === 'not in') {
        const items = b.t === 'dict' ? [...b.map.keys()].map((k) => ({ t: 'str', v: k }) as Value) : this.iterate(b);
        // `'head' in name` on strings is a substring test, not membership of one character
        if (a.t === 'str' && b.t === 'str') r = b.v.includes(a.v);
        else if (!items || a.t !== 'str' && a.t !== 'num') r = undefined;
        else r = items.some((x) => (x.t === 'str' || x.t === 'num') && x.v === a.v);
        if (r !== undefined && op === 'not in') r = !r;
      } else {
        const x = num(a);
        const y = num(b);
        if (x === undefined || y === undefined) r = undefined;
        else r = op === '<' ? x < y : op === '<=' ? x <= y : op === '>' ? x > y : op === '>=' ? x >= y : undefined;
      }
      if (r === undefined) return UNKNOWN;
      result = result && r;
    }
    return { t: 'bool', v: result };
  }

  private subscript(obj: Value, index: Expr, frame: Frame): Value {
    if (index.k === 'slice') {
      const items = this.iterate(obj);
      const lo = index.lower ? num(this.evalExpr(index.lower, frame)) : 0;
      const hi = index.upper ? num(this.evalExpr(index.upper, frame)) : items?.length;
      if (isTensor(obj)) return freshTensor(undefined, obj.rank);
      if (!items || lo === undefined || hi === undefined || index.step) return UNKNOWN;
      const sl = items.slice(lo < 0 ? items.length + lo : lo, hi < 0 ? items.length + hi : hi);
      if (obj.t === 'module' && this.containerKind(obj.m) === 'sequential') {
        const m = newModule('sequential', 'torch.nn.Sequential');
        sl.forEach((x, i) => x.t === 'module' && m.children.push([String(i), x.m]));
        return { t: 'module', m };
      }
      return { t: 'list', items: sl, tuple: obj.t === 'list' && obj.tuple };
    }
    const key = this.evalExpr(index, frame);
    if (isTensor(obj)) return freshTensor(undefined, undefined);
    if (obj.t === 'dict' || (obj.t === 'module' && this.containerKind(obj.m) === 'moduledict')) {
      const k = keyOf(key);
      if (k === undefined) return UNKNOWN;
      if (obj.t === 'dict') return obj.map.get(k) ?? UNKNOWN;
      const child = obj.m.children.find(([n]) => n === k);
      return child ? { t: 'module', m: child[1] } : UNKNOWN;
    }
    if (obj.t === 'obj' && (obj.q === 'omegaconf.DictConfig' || obj.q === 'argparse.Namespace')) {
      const k = keyOf(key);
      return (k !== undefined && obj.state.get(k)) || UNKNOWN;
    }
    const items = this.iterate(obj);
    const i = num(key);
    if (!items || i === undefined || !Number.isInteger(i)) return UNKNOWN;
    return items[i < 0 ? items.length + i : i] ?? UNKNOWN;
  }

  getAttr(obj: Value, attr: string, frame: Frame): Value {
    switch (obj.t) {
      case 'ext': return { t: 'ext', q: canonical(`${obj.q}.${attr}`) };
      case 'module': {
        const m = obj.m;
        const child = m.children.find(([n]) => n === attr);
        if (child) return { t: 'module', m: child[1] };
        const a = m.attrs.get(attr);
        if (a) return a;
        if (attr === 'training') return UNKNOWN;
        if (m.cls) {
          const mem = this.classMember(m.cls, attr);
          if (mem) return mem.value.t === 'func' ? { t: 'func', fn: mem.value.fn, self: obj } : mem.value;
        }
        if (m.kind === 'leaf') {
          const v = m.args.get(attr);
          if (v) return v;
        }
        return { t: 'obj', q: `${m.type}.${attr}`, args: [obj], kwargs: new Map(), state: new Map([['__bound__', obj]]) };
      }
      case 'class': {
        const mem = this.classMember(obj.cls, attr);
        return mem ? mem.value : UNKNOWN;
      }
      case 'super': {
        const chain = obj.self.t === 'module' && obj.self.m.cls ? this.mro(obj.self.m.cls) : [];
        const i = chain.indexOf(obj.after);
        for (const c of chain.slice(i + 1)) {
          const s = c.stmt.body.find((x) => x.k === 'def' && x.name === attr);
          if (s && s.k === 'def') return { t: 'func', fn: this.funcInfo(s, c.scope, c.path, c), self: obj.self };
        }
        // the library constructor of a Sequential/ModuleList/ModuleDict subclass registers the layers passed to it
        if (attr === '__init__' && obj.self.t === 'module' && this.containerKind(obj.self.m) !== undefined) {
          return { t: 'obj', q: 'super.__init__', args: [], kwargs: new Map(), state: new Map([['__bound__', obj.self]]) };
        }
        return { t: 'ext', q: `super.${attr}` };
      }
      case 'obj': {
        if (obj.q === '<module>') {
          const p = str(obj.state.get('__path__'));
          return p ? this.lookup(this.moduleScope(p), attr) : UNKNOWN;
        }
        const s = obj.state.get(attr);
        if (s) return s;
        if (obj.q === 'pathlib.Path') {
          const p = pathOf(obj);
          if (p !== undefined && attr === 'parent') return pathValue(posix.dirname(p));
          if (p !== undefined && attr === 'name') return { t: 'str', v: posix.basename(p) };
        }
        return { t: 'obj', q: `${obj.q}().${attr}`, args: [obj], kwargs: new Map(), state: new Map([['__bound__', obj]]) };
      }
      case 'dict': {
        // OmegaConf/Hydra configs and attribute-style dicts: cfg.train.batch_size
        const v = obj.map.get(attr);
        if (v) return v;
        return { t: 'obj', q: `dict.${attr}`, args: [obj], kwargs: new Map(), state: new Map([['__bound__', obj]]) };
      }
      case 'list': return { t: 'obj', q: `list.${attr}`, args: [obj], kwargs: new Map(), state: new Map([['__bound__', obj]]) };
      case 'str': return { t: 'obj', q: `str.${attr}`, args: [obj], kwargs: new Map(), state: new Map([['__bound__', obj]]) };
      case 'tensor': return { t: 'obj', q: `tensor.${attr}`, args: [obj], kwargs: new Map(), state: new Map([['__bound__', obj]]) };
      default: return UNKNOWN;
    }
  }

  // ---------- calls ----------

  evalCall(e: CallExpr, frame: Frame): Value {
    const callee = this.evalExpr(e.fn, frame);
    const args: Value[] = [];
    for (const a of e.args) {
      if (a.k === 'star') {
        const items = this.iterate(this.evalExpr(a.value, frame));
        if (!items) {
          args.push(UNKNOWN);
          continue;
        }
        args.push(...items);
      } else args.push(this.evalExpr(a, frame));
    }
    const kwargs = new Map<string, Value>();
    for (const k of e.kwargs) kwargs.set(k.name, this.evalExpr(k.value, frame));
    for (const s of e.starKwargs) {
      const d = this.evalExpr(s, frame);
      if (d.t === 'dict') for (const [k, v] of d.map) kwargs.set(k, v);
    }
    const result = this.call(callee, args, kwargs, frame, e);
    for (const o of this.observers) o(e, callee, args, kwargs, frame, result);
    return result;
  }

  call(callee: Value, args: Value[], kwargs: Map<string, Value>, frame: Frame, site?: CallExpr): Value {
    if (frame.depth > MAX_CALL_DEPTH) return UNKNOWN;
    switch (callee.t) {
      case 'func': return this.callFunction(callee.fn, callee.self, args, kwargs, frame, site);
      case 'class': return this.instantiate(callee.cls, args, kwargs, frame, site);
      case 'partial': {
        const kw = new Map(callee.kwargs);
        for (const [k, v] of kwargs) kw.set(k, v);
        return this.call(callee.fn, [...callee.args, ...args], kw, frame, site);
      }
      case 'ext': return this.callExternal(callee.q, args, kwargs, frame, site);
      case 'module': return this.callModule(callee.m, args, kwargs, frame);
      case 'obj': return this.callMethod(callee, args, kwargs, frame, site);
      case 'super': return UNKNOWN;
      default: {
        if (frame.recorder && args.some(isTensor)) return freshTensor();
        return UNKNOWN;
      }
    }
  }

  /** Binds arguments to parameters; defaults are evaluated in the defining scope. */
  bindParams(fn: FuncInfo, self: Value | undefined, args: Value[], kwargs: Map<string, Value>, frame: Frame): Scope {
    const scope: Scope = { path: fn.path, vars: new Map(), parent: fn.scope };
    const defFrame: Frame = { scope: fn.scope, path: fn.path, body: [], done: false, depth: frame.depth + 1 };
    const params = fn.stmt.params;
    const isStatic = fn.stmt.decorators.some((d) => d.k === 'name' && d.id === 'staticmethod');
    const isClassMethod = fn.stmt.decorators.some((d) => d.k === 'name' && d.id === 'classmethod');
    const positional = self && !isStatic ? [isClassMethod ? UNKNOWN : self, ...args] : [...args];
    const decoDefaults = this.decoratorDefaults(fn, frame);
    let pi = 0;
    const rest = new Map(kwargs);
    for (const p of params) {
      if (p.kind === 'star') {
        scope.vars.set(p.name, { t: 'list', items: positional.slice(pi), tuple: true });
        pi = positional.length;
        continue;
      }
      if (p.kind === 'kwstar') {
        scope.vars.set(p.name, { t: 'dict', map: new Map(rest) });
        rest.clear();
        continue;
      }
      if (p.kind === 'normal' && pi < positional.length) {
        scope.vars.set(p.name, positional[pi++]);
        continue;
      }
      if (rest.has(p.name)) {
        scope.vars.set(p.name, rest.get(p.name)!);
        rest.delete(p.name);
        continue;
      }
      const dv = decoDefaults.get(p.name);
      if (dv) scope.vars.set(p.name, dv);
      else if (p.default) scope.vars.set(p.name, this.evalExpr(p.default, defFrame));
      else scope.vars.set(p.name, UNKNOWN);
    }
    return scope;
  }

  /** click options and Hydra's config decorator supply parameter values the caller does not pass. */
  private decoratorDefaults(fn: FuncInfo, frame: Frame): Map<string, Value> {
    const out = new Map<string, Value>();
    const defFrame: Frame = { scope: fn.scope, path: fn.path, body: [], done: false, depth: frame.depth + 1 };
    for (const d of fn.stmt.decorators) {
      if (d.k !== 'call') continue;
      const callee = this.evalExpr(d.fn, defFrame);
      if (callee.t !== 'ext') continue;
      if (callee.q === 'click.option' || callee.q === 'click.argument') {
        const names = d.args.map((a) => this.evalExpr(a, defFrame)).map(str).filter((s): s is string => !!s);
        const flag = names.find((n) => n.startsWith('--')) ?? names[0];
        const plain = names.find((n) => !n.startsWith('-'));
        const dest = (plain ?? flag ?? '').replace(/^-+/, '').replace(/-/g, '_');
        const def = d.kwargs.find((k) => k.name === 'default');
        if (dest && def) out.set(dest, withWhat(this.evalExpr(def.value, defFrame), `${flag ?? dest} default`));
      } else if (callee.q === 'hydra.main') {
        const kw = (n: string) => {
          const k = d.kwargs.find((x) => x.name === n);
          return k ? str(this.evalExpr(k.value, defFrame)) : undefined;
        };
        const dir = kw('config_path');
        const name = kw('config_name');
        const first = fn.stmt.params[0];
        if (dir !== undefined && name && first) {
          const ref = posix.join(dir, name.endsWith('.yaml') || name.endsWith('.yml') ? name : `${name}.yaml`);
          const data = this.ws.resolveDataFile(fn.path, ref);
          if (data) out.set(first.name, loadConfig(data.path, data.text));
        }
      }
    }
    return out;
  }

  callFunction(fn: FuncInfo, self: Value | undefined, args: Value[], kwargs: Map<string, Value>, frame: Frame, _site?: CallExpr): Value {
    const scope = this.bindParams(fn, self, args, kwargs, frame);
    const inner: Frame = { scope, path: fn.path, body: fn.stmt.body, self, cls: fn.owner, done: false, depth: frame.depth + 1, recorder: frame.recorder, fn };
    this.execBody(fn.stmt.body, inner);
    return inner.returned ?? NONE;
  }

  instantiate(cls: ClassInfo, args: Value[], kwargs: Map<string, Value>, frame: Frame, site?: CallExpr): Value {
    if (this.isTorchModuleClass(cls)) {
      const m = newModule('user', `${cls.path}::${cls.name}`);
      m.cls = cls;
      if (site) m.site = { path: frame.path, call: site };
      const self: Value = { t: 'module', m };
      // a subclass of Sequential/ModuleList passes its layers to the base constructor
      const init = this.classMember(cls, '__init__');
      if (init && init.value.t === 'func') this.callFunction(init.value.fn, self, args, kwargs, frame);
      else if (this.externalBases(cls).includes('torch.nn.Sequential')) fillSequential(m, args);
      return self;
    }
    // plain classes (configs, dataclasses): an object with attributes
    const obj: Value = { t: 'obj', q: `${cls.path}::${cls.name}`, args, kwargs, state: new Map(), site: site ? { path: frame.path, call: site } : undefined };
    const isDataclass = cls.stmt.decorators.some((d) => /dataclass/.test(d.k === 'call' ? (d.fn.k === 'name' ? d.fn.id : d.fn.k === 'attr' ? d.fn.attr : '') : d.k === 'name' ? d.id : d.k === 'attr' ? d.attr : ''));
    if (isDataclass) {
      const defFrame: Frame = { scope: cls.scope, path: cls.path, body: cls.stmt.body, done: false, depth: frame.depth + 1 };
      let i = 0;
      for (const s of cls.stmt.body) {
        if (s.k === 'assign' && s.targets[0].k === 'name') {
          const name = s.targets[0].id;
          obj.state.set(name, i < args.length ? args[i] : kwargs.get(name) ?? withWhat(this.evalExpr(s.value, defFrame), `${cls.name}.${name}`));
          i++;
        }
      }
    }
    const init = this.classMember(cls, '__init__');
    if (init && init.value.t === 'func') this.callFunction(init.value.fn, obj, args, kwargs, frame);
    return obj;
  }

  private callModule(m: ModuleInst, args: Value[], kwargs: Map<string, Value>, frame: Frame): Value {
    const rec = frame.recorder;
    if (!rec) return UNKNOWN;
    const input = args[0] ?? kwargs.get('input') ?? UNKNOWN;
    switch (m.kind) {
      case 'sequential': return this.runSequential(m, input, frame);
      case 'user': {
        const fwd = m.cls ? this.classMember(m.cls, 'forward') : undefined;
        if (!fwd && m.children.length && this.containerKind(m) === 'sequential') return this.runSequential(m, input, frame);
        const out = fwd && fwd.value.t === 'func' ? this.callFunction(fwd.value.fn, { t: 'module', m }, args, kwargs, frame) : freshTensor();
        if (m.children.length) return out;
        // a user module without submodules is a leaf of named_modules(): like a library layer it consumes the
        // tensor it is called on and produces what it returns (its forward was still traced above)
        rec.called.add(m);
        if (isTensor(input)) {
          for (const p of input.from) rec.feeds.push([p, m]);
          rec.inputs.set(m, input);
        }
        const mark = (v: Value): Value => (isTensor(v) ? { t: 'tensor', from: [m], ch: v.ch, rank: v.rank } : v);
        return out.t === 'list' ? { ...out, items: out.items.map(mark) } : mark(out);
      }
      case 'leaf': {
        rec.called.add(m);
        if (isTensor(input)) {
          for (const p of input.from) rec.feeds.push([p, m]);
          rec.inputs.set(m, input);
        }
        const out: Value = { t: 'tensor', from: [m], ...leafOutput(m, isTensor(input) ? input : undefined) };
        if (familyOf(m.type) === 'rnn') return { t: 'list', items: [out, UNKNOWN], tuple: true };
        return out;
      }
      default:
        return freshTensor();
    }
  }

  /**
   * nn.Sequential.forward: each child takes the previous one's output. When some registration could not be
   * followed, the order has a hole, so each child gets a tensor of unknown origin rather than a made-up neighbour.
   */
  private runSequential(m: ModuleInst, input: Value, frame: Frame): Value {
    let x = input;
    for (const [, child] of m.children) x = this.callModule(child, [m.incomplete ? freshTensor() : x], new Map(), frame);
    return m.incomplete ? freshTensor() : x;
  }

  /** The library container a module is or subclasses (user classes deriving from nn.Sequential count). */
  containerKind(m: ModuleInst): 'sequential' | 'modulelist' | 'moduledict' | undefined {
    if (m.kind === 'sequential' || m.kind === 'modulelist' || m.kind === 'moduledict') return m.kind;
    if (m.kind !== 'user' || !m.cls) return undefined;
    const ext = this.externalBases(m.cls);
    if (ext.includes('torch.nn.Sequential')) return 'sequential';
    if (ext.includes('torch.nn.ModuleList')) return 'modulelist';
    if (ext.includes('torch.nn.ModuleDict')) return 'moduledict';
    return undefined;
  }

  private callMethod(callee: Extract<Value, { t: 'obj' }>, args: Value[], kwargs: Map<string, Value>, frame: Frame, site?: CallExpr): Value {
    const bound = callee.state.get('__bound__');
    const method = callee.q.slice(callee.q.lastIndexOf('.') + 1);
    if (bound?.t === 'list') {
      const l = bound;
      if (method === 'append' && args[0]) l.items.push(args[0]);
      else if (method === 'extend' && args[0]) {
        const items = this.iterate(args[0]);
        if (items) l.items.push(...items);
      } else if (method === 'insert' && args[1]) {
        const i = num(args[0]);
        if (i !== undefined) l.items.splice(i, 0, args[1]);
      } else if (method === 'pop') return l.items.pop() ?? UNKNOWN;
      else if (method === 'copy') return { t: 'list', items: [...l.items], tuple: false };
      else if (method === 'index' || method === 'count') return UNKNOWN;
      return NONE;
    }
    if (bound?.t === 'dict') {
      if (method === 'get') {
        const k = keyOf(args[0] ?? UNKNOWN);
        return (k !== undefined ? bound.map.get(k) : undefined) ?? args[1] ?? (k !== undefined ? NONE : UNKNOWN);
      }
      if (method === 'items') return { t: 'list', items: [...bound.map].map(([k, v]) => ({ t: 'list', items: [{ t: 'str', v: k }, v], tuple: true })), tuple: false };
      if (method === 'keys') return { t: 'list', items: [...bound.map.keys()].map((k) => ({ t: 'str', v: k })), tuple: false };
      if (method === 'values') return { t: 'list', items: [...bound.map.values()], tuple: false };
      if (method === 'update' && args[0]?.t === 'dict') for (const [k, v] of args[0].map) bound.map.set(k, v);
      if (method === 'setdefault') {
        const k = keyOf(args[0] ?? UNKNOWN);
        if (k !== undefined && !bound.map.has(k)) bound.map.set(k, args[1] ?? NONE);
        return k !== undefined ? bound.map.get(k)! : UNKNOWN;
      }
      return UNKNOWN;
    }
    if (bound?.t === 'str') {
      const s = bound.v;
      if (method === 'format' || method === 'join') return UNKNOWN;
      if (method === 'lower') return { t: 'str', v: s.toLowerCase() };
      if (method === 'upper') return { t: 'str', v: s.toUpperCase() };
      if (method === 'startswith') return str(args[0]) !== undefined ? { t: 'bool', v: s.startsWith(str(args[0])!) } : UNKNOWN;
      if (method === 'endswith') return str(args[0]) !== undefined ? { t: 'bool', v: s.endsWith(str(args[0])!) } : UNKNOWN;
      return UNKNOWN;
    }
    if (bound?.t === 'module') {
      const m = bound.m;
      const container = this.containerKind(m);
      if (method === '__init__' && callee.q === 'super.__init__') {
        if (container === 'sequential') fillSequential(m, args);
        else if (args[0]) fillContainer(m, args[0], (v) => this.iterate(v));
        return NONE;
      }
      if (method === 'add_module' || method === 'register_module') {
        const name = str(args[0]);
        if (name !== undefined && args[1]?.t === 'module') registerChild(m, name, args[1].m);
        else if (args[1]?.t !== 'none') m.incomplete = true;
        return NONE;
      }
      if (method === 'append' && (container === 'modulelist' || container === 'sequential')) {
        if (args[0]?.t === 'module') m.children.push([String(m.children.length), args[0].m]);
        else m.incomplete = true;
        return bound;
      }
      if (method === 'extend' && (container === 'modulelist' || container === 'sequential')) {
        const items = this.iterate(args[0] ?? UNKNOWN);
        if (!items) m.incomplete = true;
        for (const x of items ?? []) {
          if (x.t === 'module') m.children.push([String(m.children.length), x.m]);
          else m.incomplete = true;
        }
        return bound;
      }
      if ((method === 'children' || method === 'values') && m.kind !== 'leaf') return { t: 'list', items: m.children.map(([, c]) => ({ t: 'module', m: c })), tuple: false };
      if (method === 'items' && container === 'moduledict') return { t: 'list', items: m.children.map(([n, c]) => ({ t: 'list', items: [{ t: 'str', v: n }, { t: 'module', m: c }], tuple: true })), tuple: false };
      // init loops (`for m in self.modules()`, `self.apply(fn)`) see the modules registered so far, as at runtime
      if (method === 'modules') return { t: 'list', items: subtree(m).map(([, x]) => ({ t: 'module', m: x })), tuple: false };
      if (method === 'named_modules') return { t: 'list', items: subtree(m).map(([n, x]) => ({ t: 'list', items: [{ t: 'str', v: n }, { t: 'module', m: x }], tuple: true })), tuple: false };
      if (method === 'named_children') return { t: 'list', items: m.children.map(([n, c]) => ({ t: 'list', items: [{ t: 'str', v: n }, { t: 'module', m: c }], tuple: true })), tuple: false };
      if (method === 'apply' && args[0]) {
        // nn.Module.apply: children first, then the module itself
        for (const [, x] of subtree(m).reverse()) this.call(args[0], [{ t: 'module', m: x }], new Map(), frame);
        return bound;
      }
      if (method === 'forward' && frame.recorder) return this.callModule(m, args, kwargs, frame);
      if (method === 'train' || method === 'eval' || method === 'to' || method === 'cuda' || method === 'cpu' || method === 'float' || method === 'double' || method === 'half' || method === 'requires_grad_') return bound;
      return UNKNOWN;
    }
    if (bound?.t === 'tensor') {
      // methods on tensors: a new tensor no layer produced directly
      const keepsCh = ['relu', 'relu_', 'sigmoid', 'tanh', 'clone', 'contiguous', 'float', 'to', 'detach', 'abs'].includes(method);
      if (method === 'size' || method === 'dim' || method === 'numel' || method === 'item' || method === 'tolist') return UNKNOWN;
      return freshTensor(keepsCh ? bound.ch : undefined, keepsCh ? bound.rank : undefined);
    }
    // argparse: parser.parse_args() collects the add_argument calls made on the same parser
    if (bound?.t === 'obj' && bound.q === 'argparse.ArgumentParser') {
      if (method === 'parse_args' || method === 'parse_known_args') {
        const ns = this.argparseNamespace(bound, frame);
        return method === 'parse_known_args' ? { t: 'list', items: [ns, UNKNOWN], tuple: true } : ns;
      }
      if (method === 'set_defaults') {
        for (const [k, v] of kwargs) bound.state.set(`default:${k}`, v);
      }
      return UNKNOWN;
    }
    if (bound?.t === 'obj' && bound.q === 'pathlib.Path' && (method === 'read_text' || method === 'open')) {
      return { t: 'obj', q: method === 'open' ? 'builtins.open' : 'text-of', args: [bound], kwargs: new Map(), state: new Map() };
    }
    if (bound?.t === 'obj' && bound.q === 'builtins.open' && method === 'read') {
      return { t: 'obj', q: 'text-of', args: [bound], kwargs: new Map(), state: new Map() };
    }
    // scikit-learn's fit/partial_fit return the estimator itself, so `s = StandardScaler().fit(X)` names the scaler
    if (bound?.t === 'obj' && bound.q.startsWith('sklearn.') && (method === 'fit' || method === 'partial_fit')) return bound;
    if (frame.recorder && args.some(isTensor)) return freshTensor();
    return { t: 'obj', q: `${callee.q}()`, args, kwargs, state: new Map(), site: site ? { path: frame.path, call: site } : undefined };
  }

  private argparseNamespace(parser: Extract<Value, { t: 'obj' }>, frame: Frame): Value {
    const ns = new Map<string, Value>();
    const body = parser.body ?? frame.body;
    const path = str(parser.state.get('__path__')) ?? frame.path;
    const scopeFrame: Frame = { ...frame, done: false };
    walkStmts(body, (s) => {
      if (s.k === 'def' || s.k === 'class') return false;
      if (s.k !== 'expr' || s.value.k !== 'call' || s.value.fn.k !== 'attr' || s.value.fn.attr !== 'add_argument') return;
      const target = this.evalExpr(s.value.fn.obj, scopeFrame);
      const group = target.t === 'obj' && target.q.endsWith('.add_argument_group()') ? target.args : undefined;
      if (target !== parser && !(group && target.t === 'obj' && target.state.get('__parser__') === parser) && !(target.t === 'obj' && target.q === 'argparse.ArgumentParser().add_argument_group()')) return;
      const call = s.value;
      const flags = call.args.map((a) => this.evalExpr(a, scopeFrame)).map(str).filter((x): x is string => !!x);
      const long = flags.find((f) => f.startsWith('--')) ?? flags[0];
      const destKw = call.kwargs.find((k) => k.name === 'dest');
      const dest = destKw ? str(this.evalExpr(destKw.value, scopeFrame)) : long?.replace(/^-+/, '').replace(/-/g, '_');
      if (!dest) return;
      const defKw = call.kwargs.find((k) => k.name === 'default');
      const typeKw = call.kwargs.find((k) => k.name === 'type');
      const actionKw = call.kwargs.find((k) => k.name === 'action');
      const action = actionKw ? str(this.evalExpr(actionKw.value, scopeFrame)) : undefined;
      let v: Value = defKw ? this.evalExpr(defKw.value, scopeFrame) : action === 'store_true' ? { t: 'bool', v: false } : action === 'store_false' ? { t: 'bool', v: true } : NONE;
      const type = typeKw ? this.evalExpr(typeKw.value, scopeFrame) : undefined;
      if (v.t === 'str' && type?.t === 'ext' && (type.q === 'builtins.int' || type.q === 'builtins.float')) {
        const n = Number(v.v);
        if (!Number.isNaN(n)) v = { t: 'num', v: type.q === 'builtins.int' ? Math.trunc(n) : n, origin: v.origin };
      }
      const o = v.t === 'num' || v.t === 'str' || v.t === 'bool' ? v.origin : undefined;
      ns.set(dest, withWhat(v, `${long ?? dest} default`, o ? undefined : { path, line: call.span.line }));
    });
    for (const [k, v] of parser.state) if (k.startsWith('default:')) ns.set(k.slice(8), v);
    return { t: 'obj', q: 'argparse.Namespace', args: [], kwargs: new Map(), state: ns };
  }

  private callExternal(q: string, args: Value[], kwargs: Map<string, Value>, frame: Frame, site?: CallExpr): Value {
    const c = canonical(q);
    // the base constructor called explicitly, `nn.Sequential.__init__(self, *layers)`, as super().__init__ does
    if (c.endsWith('.__init__') && args[0]?.t === 'module') {
      const base = c.slice(0, -'.__init__'.length);
      if (base === 'torch.nn.Sequential' && this.containerKind(args[0].m) === 'sequential') {
        fillSequential(args[0].m, args.slice(1));
        return NONE;
      }
      if ((base === 'torch.nn.ModuleList' || base === 'torch.nn.ModuleDict') && this.containerKind(args[0].m) !== undefined) {
        if (args[1]) fillContainer(args[0].m, args[1], (v) => this.iterate(v));
        return NONE;
      }
    }
    if (c === 'torch.nn.Sequential') {
      const m = newModule('sequential', c);
      fillSequential(m, args);
      if (site) m.site = { path: frame.path, call: site };
      return { t: 'module', m };
    }
    if (c === 'torch.nn.ModuleList' || c === 'torch.nn.ModuleDict') {
      const m = newModule(c === 'torch.nn.ModuleList' ? 'modulelist' : 'moduledict', c);
      if (site) m.site = { path: frame.path, call: site };
      const a = args[0];
      if (a?.t === 'dict') for (const [k, v] of a.map) v.t === 'module' && m.children.push([k, v.m]);
      else for (const x of (a ? this.iterate(a) : []) ?? []) {
        if (x.t === 'module') m.children.push([String(m.children.length), x.m]);
        else if (x.t === 'list' && x.items.length === 2 && x.items[1].t === 'module') {
          const k = keyOf(x.items[0]);
          if (k !== undefined) m.children.push([k, x.items[1].m]);
        }
      }
      return { t: 'module', m };
    }
    if (isTorchLayerClass(c)) return { t: 'module', m: this.makeLeaf(c, args, kwargs, frame, site) };
    if (c === 'functools.partial' && args[0]) return { t: 'partial', fn: args[0], args: args.slice(1), kwargs };
    if (c === 'collections.OrderedDict' || c === 'builtins.dict') {
      const map = new Map<string, Value>();
      const src = args[0];
      if (src?.t === 'dict') for (const [k, v] of src.map) map.set(k, v);
      else if (src) {
        const items = this.iterate(src);
        if (!items) return UNKNOWN;
        for (const it of items) {
          const pair = this.iterate(it);
          const k = pair && pair.length === 2 ? keyOf(pair[0]) : undefined;
          if (k === undefined) return UNKNOWN;
          map.set(k, pair![1]);
        }
      }
      for (const [k, v] of kwargs) map.set(k, v);
      return { t: 'dict', map };
    }
    if (c === 'builtins.super') {
      if (frame.self && frame.cls) return { t: 'super', self: frame.self, after: frame.cls };
      return UNKNOWN;
    }
    if (c.startsWith('super.')) return NONE;
    const builtin = this.builtin(c, args, kwargs, frame);
    if (builtin) return builtin;
    const config = this.configLoad(c, args, kwargs, frame);
    if (config) return config;
    if (frame.recorder && (c === 'torch.cat' || c === 'torch.concat' || c === 'torch.stack')) {
      const parts = this.iterate(args[0] ?? UNKNOWN);
      const dim = num(kwargs.get('dim') ?? args[1]);
      if (c !== 'torch.stack' && parts && dim === 1 && parts.every((p) => isTensor(p) && p.ch !== undefined)) {
        return freshTensor(parts.reduce((s, p) => s + ((p as { ch: number }).ch), 0), (parts[0] as { rank?: number }).rank);
      }
      return freshTensor();
    }
    if (frame.recorder && args.some(isTensor)) {
      const t0 = args.find(isTensor)!;
      if (CHANNEL_PRESERVING_FUNCTIONS.has(c)) return freshTensor(t0.ch, t0.rank);
      return freshTensor();
    }
    if (frame.recorder && isTensor(args[0] ?? UNKNOWN)) return freshTensor();
    if (c.startsWith('torch.') && frame.recorder && /^torch\.(randn|rand|zeros|ones|empty|full|arange|bernoulli|rand_like|randn_like|zeros_like|ones_like)/.test(c)) return freshTensor();
    const state = new Map<string, Value>();
    // a parser remembers the statements it was made in: parse_args() collects the add_argument calls there
    const isParser = c === 'argparse.ArgumentParser';
    if (isParser) state.set('__path__', { t: 'str', v: frame.path });
    return { t: 'obj', q: c, args, kwargs, state, site: site ? { path: frame.path, call: site } : undefined, ...(isParser ? { body: frame.body } : {}) };
  }

  makeLeaf(type: string, args: Value[], kwargs: Map<string, Value>, frame: Frame, site?: CallExpr): ModuleInst {
    const m = newModule('leaf', type);
    if (site) m.site = { path: frame.path, call: site };
    const spec = layerSpec(type);
    if (spec) {
      spec.params.forEach((p, i) => {
        if (i < args.length) {
          m.args.set(p.name, args[i]);
          m.given.add(p.name);
        }
      });
      for (const [k, v] of kwargs) {
        m.args.set(k, v);
        m.given.add(k);
      }
      for (const [name, v] of leafDefaults(spec)) {
        if (!m.args.has(name)) m.args.set(name, v);
      }
    } else {
      args.forEach((a, i) => m.args.set(String(i), a));
      for (const [k, v] of kwargs) {
        m.args.set(k, v);
        m.given.add(k);
      }
    }
    return m;
  }

  private builtin(c: string, args: Value[], kwargs: Map<string, Value>, frame: Frame): Value | undefined {
    const a0 = args[0];
    switch (c) {
      case 'builtins.range': {
        const ns = args.map(num);
        if (ns.some((n) => n === undefined) || !ns.length) return UNKNOWN;
        const [start, stop, step] = ns.length === 1 ? [0, ns[0]!, 1] : [ns[0]!, ns[1]!, ns[2] ?? 1];
        if (step === 0) return UNKNOWN;
        const items: Value[] = [];
        for (let i = start; step > 0 ? i < stop : i > stop; i += step) {
          items.push({ t: 'num', v: i });
          if (items.length > MAX_UNROLL) return UNKNOWN;
        }
        return { t: 'list', items, tuple: false };
      }
      case 'builtins.len': {
        const items = a0?.t === 'dict' ? [...a0.map.keys()] : this.iterate(a0 ?? UNKNOWN);
        return items ? { t: 'num', v: items.length } : UNKNOWN;
      }
      case 'builtins.zip': {
        const lists = args.map((a) => this.iterate(a));
        if (lists.some((l) => !l)) return UNKNOWN;
        const n = Math.min(...lists.map((l) => l!.length));
        return { t: 'list', items: Array.from({ length: n }, (_, i) => ({ t: 'list', items: lists.map((l) => l![i]), tuple: true }) as Value), tuple: false };
      }
      case 'builtins.enumerate': {
        const items = this.iterate(a0 ?? UNKNOWN);
        const start = num(args[1] ?? kwargs.get('start')) ?? 0;
        return items ? { t: 'list', items: items.map((v, i) => ({ t: 'list', items: [{ t: 'num', v: i + start }, v], tuple: true }) as Value), tuple: false } : UNKNOWN;
      }
      case 'builtins.reversed': {
        const items = this.iterate(a0 ?? UNKNOWN);
        return items ? { t: 'list', items: [...items].reverse(), tuple: false } : UNKNOWN;
      }
      case 'builtins.list': case 'builtins.tuple': {
        if (!a0) return { t: 'list', items: [], tuple: c === 'builtins.tuple' };
        const items = this.iterate(a0);
        return items ? { t: 'list', items: [...items], tuple: c === 'builtins.tuple' } : UNKNOWN;
      }
      case 'builtins.int': case 'builtins.float': {
        const n = num(a0) ?? (a0?.t === 'str' ? Number(a0.v) : undefined);
        if (n === undefined || Number.isNaN(n)) return UNKNOWN;
        return { t: 'num', v: c === 'builtins.int' ? Math.trunc(n) : n, origin: a0 && (a0.t === 'num' || a0.t === 'str') ? a0.origin : undefined };
      }
      case 'builtins.bool': {
        const t = truthy(a0);
        return t === undefined ? UNKNOWN : { t: 'bool', v: t };
      }
      case 'builtins.str': return a0?.t === 'str' ? a0 : a0?.t === 'num' ? { t: 'str', v: String(a0.v) } : UNKNOWN;
      case 'builtins.min': case 'builtins.max': case 'builtins.sum': {
        const items = args.length === 1 ? this.iterate(a0!) : args;
        const ns = items?.map(num);
        if (!ns || !ns.length || ns.some((n) => n === undefined)) return UNKNOWN;
        const vals = ns as number[];
        return { t: 'num', v: c === 'builtins.sum' ? vals.reduce((s, x) => s + x, 0) : c === 'builtins.min' ? Math.min(...vals) : Math.max(...vals) };
      }
      case 'builtins.abs': { const n = num(a0); return n === undefined ? UNKNOWN : { t: 'num', v: Math.abs(n) }; }
      case 'builtins.round': { const n = num(a0); return n === undefined ? UNKNOWN : { t: 'num', v: Math.round(n) }; }
      case 'builtins.setattr': {
        const name = str(args[1]);
        if (a0 && name !== undefined && args[2]) this.setAttr(a0, name, args[2]);
        return NONE;
      }
      case 'builtins.getattr': {
        const name = str(args[1]);
        if (a0 && name !== undefined) {
          const v = this.getAttr(a0, name, frame);
          return v.t === 'obj' && v.q.endsWith(`.${name}`) && args[2] ? args[2] : v;
        }
        return UNKNOWN;
      }
      case 'builtins.isinstance': {
        if (a0?.t !== 'module' || !args[1]) return UNKNOWN;
        const classes = args[1].t === 'list' ? args[1].items : [args[1]];
        const answers = classes.map((k) => this.moduleIsInstance(a0.m, k));
        if (answers.includes(true)) return { t: 'bool', v: true };
        return answers.every((x) => x === false) ? { t: 'bool', v: false } : UNKNOWN;
      }
      case 'builtins.hasattr': case 'builtins.print': case 'builtins.callable':
        return c === 'builtins.print' ? NONE : UNKNOWN;
      case 'builtins.open': return { t: 'obj', q: 'builtins.open', args, kwargs, state: new Map() };
      case 'builtins.vars': return a0?.t === 'obj' && a0.q === 'argparse.Namespace' ? { t: 'dict', map: new Map(a0.state) } : UNKNOWN;
      case 'pathlib.Path': case 'pathlib.PurePath': {
        const parts = args.map((a) => pathOf(a));
        if (parts.some((p) => p === undefined)) return UNKNOWN;
        return pathValue(parts.length ? posix.join(...(parts as string[])) : '.');
      }
      case 'os.path.join': {
        const parts = args.map((a) => pathOf(a));
        if (parts.some((p) => p === undefined) || !parts.length) return UNKNOWN;
        return { t: 'str', v: posix.join(...(parts as string[])) };
      }
      case 'os.path.dirname': { const p = pathOf(a0 ?? UNKNOWN); return p === undefined ? UNKNOWN : { t: 'str', v: posix.dirname(p) }; }
      case 'os.path.abspath': case 'os.path.realpath': case 'os.path.normpath': return a0 ?? UNKNOWN;
      default: return undefined;
    }
  }

  /** yaml.safe_load(open(path)), json.load, tomllib.load, OmegaConf.load(path): the workspace file's values. */
  private configLoad(c: string, args: Value[], _kwargs: Map<string, Value>, frame: Frame): Value | undefined {
    if (!CONFIG_LOADERS.has(c)) return undefined;
    const a = args[0];
    let ref: string | undefined;
    if (a?.t === 'obj' && (a.q === 'builtins.open' || a.q === 'text-of')) ref = pathOf(a.args[0] ?? UNKNOWN);
    else if (a && (c === 'toml.load' || c === 'omegaconf.OmegaConf.load')) ref = pathOf(a);
    if (ref === undefined) return UNKNOWN;
    const data = this.ws.resolveDataFile(frame.path, ref);
    if (!data) return { t: 'unknown', why: `config ${ref} not in the workspace` };
    return loadConfig(data.path, data.text);
  }

  /** The items of an iterable value, when they are known. */
  iterate(v: Value): Value[] | undefined {
    switch (v.t) {
      case 'list': return v.items;
      case 'dict': return [...v.map.keys()].map((k) => ({ t: 'str', v: k }));
      case 'str': return [...v.v].map((ch) => ({ t: 'str', v: ch }));
      case 'module': {
        // user subclasses of the containers iterate like them (`class Stack(nn.ModuleList)`)
        const kind = this.containerKind(v.m);
        if (kind === 'modulelist' || kind === 'sequential') return v.m.children.map(([, c]) => ({ t: 'module', m: c }));
        if (kind === 'moduledict') return v.m.children.map(([n]) => ({ t: 'str', v: n }));
        return undefined;
      }
      default: return undefined;
    }
  }
}

function keyOf(v: Value): string | undefined {
  if (v.t === 'str') return v.v;
  if (v.t === 'num') return String(v.v);
  return undefined;
}

/**
 * A layer type's parameter defaults as values, made once per type: every leaf built gets them, and nothing mutates a
 * scalar value (withWhat copies), so leaves can share them.
 */
const defaultsBySpec = new WeakMap<object, [string, Value][]>();
function leafDefaults(spec: { params: readonly { name: string; default?: number | string | boolean | null }[]; keywordOnly?: readonly { name: string; default?: number | string | boolean | null }[] }): [string, Value][] {
  let out = defaultsBySpec.get(spec);
  if (!out) {
    out = [];
    for (const p of [...spec.params, ...(spec.keywordOnly ?? [])]) if (p.default !== undefined) out.push([p.name, fromJson(p.default)]);
    defaultsBySpec.set(spec, out);
  }
  return out;
}

function fromJson(x: number | string | boolean | null): Value {
  if (x === null) return NONE;
  if (typeof x === 'number') return { t: 'num', v: x };
  if (typeof x === 'boolean') return { t: 'bool', v: x };
  return { t: 'str', v: x };
}

function withWhat(v: Value, what: string, fallback?: { path: string; line: number }): Value {
  if (v.t === 'num' || v.t === 'str' || v.t === 'bool' || v.t === 'none') {
    const origin = v.origin ?? fallback;
    return origin ? { ...v, origin: { ...origin, what } } as Value : v;
  }
  return v;
}

function destructure(target: Expr, v: Value, name: string): Value | undefined {
  if (target.k === 'name') return target.id === name ? v : undefined;
  if ((target.k === 'tuple' || target.k === 'list') && v.t === 'list') {
    for (let i = 0; i < target.items.length; i++) {
      const got = destructure(target.items[i], v.items[i] ?? UNKNOWN, name);
      if (got) return got;
    }
  }
  if (target.k === 'tuple' || target.k === 'list') {
    for (const t of target.items) if (destructure(t, UNKNOWN, name)) return UNKNOWN;
  }
  return undefined;
}

/** The module and its descendants with qualified names, pre-order, each once (as `named_modules()`). */
function subtree(root: ModuleInst): [string, ModuleInst][] {
  const out: [string, ModuleInst][] = [];
  const seen = new Set<ModuleInst>();
  const visit = (name: string, m: ModuleInst) => {
    if (seen.has(m)) return;
    seen.add(m);
    out.push([name, m]);
    for (const [n, c] of m.children) visit(name ? `${name}.${n}` : n, c);
  };
  visit('', root);
  return out;
}

/** `'%d' % 3`, `'%s_%d' % (a, b)` with constant operands; anything else (widths, `%(k)s`, unknowns) is unknown. */
function formatPercent(fmt: string, rhs: Value): Value {
  const vals = rhs.t === 'list' && rhs.tuple ? rhs.items : [rhs];
  let i = 0;
  let ok = true;
  const out = fmt.replace(/%([%dis])/g, (_, c: string) => {
    if (c === '%') return '%';
    const v = vals[i++];
    // `%s` of a number is left out: an int and a float that are equal print differently (`2` / `2.0`)
    if (v?.t === 'num' && c !== 's') return String(Math.trunc(v.v));
    if (v?.t === 'str' && c === 's') return v.v;
    ok = false;
    return '';
  });
  if (!ok || i !== vals.length || /%/.test(fmt.replace(/%[%dis]/g, ''))) return UNKNOWN;
  return { t: 'str', v: out };
}

const lambdaDefs = new WeakMap<Expr, DefStmt>();
/** A lambda as the one-statement function it is; cached so analyses keyed by statement see one definition. */
function lambdaDef(e: Extract<Expr, { k: 'lambda' }>): DefStmt {
  let d = lambdaDefs.get(e);
  if (!d) {
    d = { k: 'def', name: '<lambda>', params: e.params, decorators: [], body: [{ k: 'return', value: e.body, span: e.body.span }], span: e.span, nameSpan: e.span, bodySpan: e.body.span, async: false };
    lambdaDefs.set(e, d);
  }
  return d;
}

function registerChild(m: ModuleInst, name: string, child: ModuleInst): void {
  // re-assigning a registered name keeps its place, as nn.Module's _modules dict does
  const i = m.children.findIndex(([n]) => n === name);
  if (i >= 0) m.children[i] = [name, child];
  else m.children.push([name, child]);
  m.attrs.delete(name);
}

function fillSequential(m: ModuleInst, args: Value[]): void {
  if (args.length === 1 && args[0].t === 'dict') {
    for (const [k, v] of args[0].map) {
      if (v.t === 'module') m.children.push([k, v.m]);
      else m.incomplete = true;
    }
    return;
  }
  args.forEach((a, i) => {
    if (a.t === 'module') m.children.push([String(i), a.m]);
    else m.incomplete = true;
  });
}

/** ModuleList(iterable) / ModuleDict(mapping or pairs) given to a subclass's base constructor. */
function fillContainer(m: ModuleInst, arg: Value, iterate: (v: Value) => Value[] | undefined): void {
  if (arg.t === 'dict') {
    for (const [k, v] of arg.map) v.t === 'module' ? m.children.push([k, v.m]) : (m.incomplete = true);
    return;
  }
  const items = iterate(arg);
  if (!items) {
    if (arg.t !== 'none') m.incomplete = true;
    return;
  }
  for (const x of items) {
    if (x.t === 'module') m.children.push([String(m.children.length), x.m]);
    else if (x.t === 'list' && x.items.length === 2 && x.items[1].t === 'module' && keyOf(x.items[0]) !== undefined) m.children.push([keyOf(x.items[0])!, x.items[1].m]);
    else m.incomplete = true;
  }
}

function isPathLike(v: Value): boolean {
  return v.t === 'obj' && v.q === 'pathlib.Path';
}

function pathOf(v: Value): string | undefined {
  if (v.t === 'str') return v.v;
  if (v.t === 'obj' && v.q === 'pathlib.Path') return str(v.state.get('path'));
  return undefined;
}

function pathValue(p: string): Value {
  return { t: 'obj', q: 'pathlib.Path', args: [], kwargs: new Map(), state: new Map([['path', { t: 'str', v: p }]]) };
}

/** Channels and rank of a leaf's output given its input, where they are constant. */
function leafOutput(m: ModuleInst, input?: Extract<Value, { t: 'tensor' }>): { ch?: number; rank?: number } {
  const fam = familyOf(m.type);
  const spec = layerSpec(m.type);
  switch (fam) {
    case 'conv': case 'convtranspose': return { ch: num(m.args.get('out_channels')), rank: spec?.rank };
    case 'linear': return { ch: num(m.args.get('out_features')), rank: 0 };
    case 'rnn': {
      const h = num(m.args.get('hidden_size'));
      const bi = truthy(m.args.get('bidirectional'));
      return { ch: h !== undefined && bi !== undefined ? h * (bi ? 2 : 1) : undefined, rank: undefined };
    }
    case 'embedding': return { ch: num(m.args.get('embedding_dim')), rank: undefined };
    default:
      if (CHANNEL_PRESERVING.has(fam)) return { ch: input?.ch, rank: input?.rank };
      return {};
  }
}
