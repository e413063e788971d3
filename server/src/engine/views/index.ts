// The views rules share, built lazily once per analysis: when two rules need the same fact, it lives here.
import { Interp } from '../interp';
import type { Workspace } from '../workspace';
import { ModelGraphs } from './model-graph';

export class Views {
  readonly interp: Interp;
  private modelsView: ModelGraphs | undefined;

  constructor(readonly ws: Workspace) {
    this.interp = new Interp(ws);
  }

  get models(): ModelGraphs {
    this.modelsView ??= new ModelGraphs(this.ws, this.interp);
    return this.modelsView;
  }
}
