// The model-graph view: for each nn.Module subclass, its layers named as named_modules() names them, and the
// direct feeds through forward (layer B consumes exactly the tensor layer A produced).
import type { CallExpr, ClassStmt, Span } from '../ir';
import { Interp, type FlowRecorder, type Frame } from '../interp';
import type { ClassInfo, ModuleInst, Value } from '../values';
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
    return path ? this.classes.filter((c) => c.path === path) : this.classes;
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

  private build(cls: ClassInfo): ModelGraph {
    const frame: Frame = { scope: cls.scope, path: cls.path, body: [], done: false, depth: 0 };
    const v = this.interp.instantiate(cls, [], new Map(), frame);
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
    let traced = false;
    const fwd = this.interp.classMember(cls, 'forward');
    if (fwd && fwd.value.t === 'func') {
      const ff: Frame = { ...frame, recorder: rec };
      const params = fwd.value.fn.stmt.params.filter((p) => p.kind === 'normal').slice(1);
      const args: Value[] = params.map((p, i) => (i === 0 || !p.default ? { t: 'tensor', from: [] } : UNKNOWN));
      // parameters with defaults keep them (bindParams evaluates them)
      try {
        this.interp.callFunction(fwd.value.fn, v, args.slice(0, params.filter((p) => !p.default).length || 1), new Map(), ff);
        traced = true;
      } catch {
        traced = false;
      }
    } else if (root.kind === 'user' && root.cls && this.interp.externalBases(root.cls).includes('torch.nn.Sequential')) {
      this.interp.call({ t: 'module', m: root }, [{ t: 'tensor', from: [] }], new Map(), { ...frame, recorder: rec });
      traced = true;
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
    const opaque = layers.filter((l) => l.inst.kind === 'opaque' || (l.inst.kind === 'leaf' && !layerSpec(l.type) && l.family === 'other' && !l.type.startsWith('torch.nn.')));
    return { cls, path: cls.path, className: cls.name, classSpan: cls.stmt.nameSpan, root, layers, modules, flow, traced, opaque, byInst };
  }

  /** Layers fed directly by `l`, and those feeding it. */
  static consumers(g: ModelGraph, l: Layer): Layer[] {
    return g.flow.filter(([a]) => a === l).map(([, b]) => b);
  }

  static producers(g: ModelGraph, l: Layer): Layer[] {
    return g.flow.filter(([, b]) => b === l).map(([a]) => a);
  }
}
