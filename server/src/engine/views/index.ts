// The views rules share, built lazily once per analysis: when two rules need the same fact, it lives here.
import { Interp } from '../interp';
import type { Workspace } from '../workspace';
import { ModelGraphs } from './model-graph';
import { TrainingView } from './training';
import { DataView } from './data';

export class Views {
  readonly interp: Interp;
  private modelsView: ModelGraphs | undefined;
  private trainingView: TrainingView | undefined;
  private dataView: DataView | undefined;

  constructor(readonly ws: Workspace) {
    this.interp = new Interp(ws);
  }

  get models(): ModelGraphs {
    this.modelsView ??= new ModelGraphs(this.ws, this.interp);
    return this.modelsView;
  }

  /** Modes, evaluation regions, training steps, optimizers and loader↔model pairs (RULES.md section B). */
  get training(): TrainingView {
    // its own interpreter: walking every script executes a lot, and the step budget is per interpreter
    this.trainingView ??= new TrainingView(this.ws, new Interp(this.ws));
    return this.trainingView;
  }

  /** Splits, preprocessing fits, transforms and datasets, with training/held-out roles (RULES.md section C). */
  get data(): DataView {
    // it runs its own interpreter per file: walking every function body evaluates calls again, and that must neither
    // use up the step budget the other views share nor make one file's findings depend on which file came first
    this.dataView ??= new DataView(this.ws);
    return this.dataView;
  }
}
