// What the engine knows of library layer classes: canonical names, constructor signatures with defaults, families.
// Defaults are those of torch/nn/modules/*.py (PyTorch 2.x); see RULES.md "Grounds".

export type Family =
  | 'conv' | 'convtranspose' | 'linear' | 'batchnorm' | 'syncbatchnorm' | 'instancenorm' | 'groupnorm' | 'layernorm'
  | 'dropout' | 'alphadropout' | 'activation' | 'selu' | 'rnn' | 'pool' | 'shape' | 'embedding' | 'other';

export interface Param {
  name: string;
  /** JSON-like default, or undefined when required. */
  default?: number | string | boolean | null;
}

export interface LayerSpec {
  /** Canonical public name, e.g. "torch.nn.BatchNorm2d". */
  type: string;
  family: Family;
  /** Spatial rank the layer expects: 1, 2, 3 for conv/norm variants, 0 for features-only (Linear). */
  rank?: number;
  params: Param[];
  /** Parameters after `*` (keyword-only) or accepted by **kwargs. */
  keywordOnly?: Param[];
}

const p = (name: string, def?: Param['default']): Param => (def === undefined ? { name } : { name, default: def });

const specs: LayerSpec[] = [];
const add = (type: string, family: Family, params: Param[], extra: Partial<LayerSpec> = {}) => specs.push({ type: `torch.nn.${type}`, family, params, ...extra });

for (const r of [1, 2, 3]) {
  add(`Conv${r}d`, 'conv', [p('in_channels'), p('out_channels'), p('kernel_size'), p('stride', 1), p('padding', 0), p('dilation', 1), p('groups', 1), p('bias', true), p('padding_mode', 'zeros'), p('device', null), p('dtype', null)], { rank: r });
  add(`ConvTranspose${r}d`, 'convtranspose', [p('in_channels'), p('out_channels'), p('kernel_size'), p('stride', 1), p('padding', 0), p('output_padding', 0), p('groups', 1), p('bias', true), p('dilation', 1), p('padding_mode', 'zeros'), p('device', null), p('dtype', null)], { rank: r });
  add(`LazyConv${r}d`, 'conv', [p('out_channels'), p('kernel_size'), p('stride', 1), p('padding', 0), p('dilation', 1), p('groups', 1), p('bias', true), p('padding_mode', 'zeros')], { rank: r });
  add(`BatchNorm${r}d`, 'batchnorm', [p('num_features'), p('eps', 1e-5), p('momentum', 0.1), p('affine', true), p('track_running_stats', true), p('device', null), p('dtype', null)], { rank: r });
  add(`LazyBatchNorm${r}d`, 'batchnorm', [p('eps', 1e-5), p('momentum', 0.1), p('affine', true), p('track_running_stats', true)], { rank: r });
  add(`InstanceNorm${r}d`, 'instancenorm', [p('num_features'), p('eps', 1e-5), p('momentum', 0.1), p('affine', false), p('track_running_stats', false), p('device', null), p('dtype', null)], { rank: r });
  add(`Dropout${r}d`, 'dropout', [p('p', 0.5), p('inplace', false)]);
  for (const kind of ['MaxPool', 'AvgPool']) add(`${kind}${r}d`, 'pool', [p('kernel_size'), p('stride', null), p('padding', 0)]);
  for (const kind of ['AdaptiveAvgPool', 'AdaptiveMaxPool']) add(`${kind}${r}d`, 'pool', [p('output_size')]);
}
add('SyncBatchNorm', 'syncbatchnorm', [p('num_features'), p('eps', 1e-5), p('momentum', 0.1), p('affine', true), p('track_running_stats', true), p('process_group', null), p('device', null), p('dtype', null)]);
add('GroupNorm', 'groupnorm', [p('num_groups'), p('num_channels'), p('eps', 1e-5), p('affine', true), p('device', null), p('dtype', null)]);
add('LayerNorm', 'layernorm', [p('normalized_shape'), p('eps', 1e-5), p('elementwise_affine', true), p('bias', true), p('device', null), p('dtype', null)]);
add('RMSNorm', 'layernorm', [p('normalized_shape'), p('eps', null), p('elementwise_affine', true)]);
add('Linear', 'linear', [p('in_features'), p('out_features'), p('bias', true), p('device', null), p('dtype', null)], { rank: 0 });
add('LazyLinear', 'linear', [p('out_features'), p('bias', true)], { rank: 0 });
add('Bilinear', 'linear', [p('in1_features'), p('in2_features'), p('out_features'), p('bias', true)], { rank: 0 });
add('Dropout', 'dropout', [p('p', 0.5), p('inplace', false)]);
add('AlphaDropout', 'alphadropout', [p('p', 0.5), p('inplace', false)]);
add('FeatureAlphaDropout', 'alphadropout', [p('p', 0.5), p('inplace', false)]);
add('SELU', 'selu', [p('inplace', false)]);
for (const a of ['ReLU', 'ReLU6', 'SiLU', 'Mish', 'Hardswish', 'Hardsigmoid']) add(a, 'activation', [p('inplace', false)]);
for (const a of ['Sigmoid', 'Tanh', 'Softsign', 'Tanhshrink', 'LogSigmoid']) add(a, 'activation', []);
add('LeakyReLU', 'activation', [p('negative_slope', 0.01), p('inplace', false)]);
add('ELU', 'activation', [p('alpha', 1.0), p('inplace', false)]);
add('CELU', 'activation', [p('alpha', 1.0), p('inplace', false)]);
add('GELU', 'activation', [p('approximate', 'none')]);
add('PReLU', 'activation', [p('num_parameters', 1), p('init', 0.25)]);
add('Softplus', 'activation', [p('beta', 1.0), p('threshold', 20.0)]);
add('Hardtanh', 'activation', [p('min_val', -1.0), p('max_val', 1.0), p('inplace', false)]);
add('Softmax', 'activation', [p('dim', null)]);
add('LogSoftmax', 'activation', [p('dim', null)]);
add('Identity', 'shape', []);
add('Flatten', 'shape', [p('start_dim', 1), p('end_dim', -1)]);
add('Unflatten', 'shape', [p('dim'), p('unflattened_size')]);
add('Upsample', 'shape', [p('size', null), p('scale_factor', null), p('mode', 'nearest'), p('align_corners', null)]);
add('Embedding', 'embedding', [p('num_embeddings'), p('embedding_dim'), p('padding_idx', null), p('max_norm', null)]);
const rnnKw = [p('bias', true), p('batch_first', false), p('dropout', 0.0), p('bidirectional', false)];
add('LSTM', 'rnn', [p('input_size'), p('hidden_size'), p('num_layers', 1), ...rnnKw, p('proj_size', 0)]);
add('GRU', 'rnn', [p('input_size'), p('hidden_size'), p('num_layers', 1), ...rnnKw]);
add('RNN', 'rnn', [p('input_size'), p('hidden_size'), p('num_layers', 1), p('nonlinearity', 'tanh'), ...rnnKw]);

const byType = new Map(specs.map((s) => [s.type, s]));

/** Containers whose children the engine tracks. */
export const CONTAINERS = new Set(['torch.nn.Sequential', 'torch.nn.ModuleList', 'torch.nn.ModuleDict']);

/** Module paths that re-export torch.nn's classes under longer names. */
const ALIASES: [RegExp, string][] = [
  // (each pattern must start with ALIAS_PREFIX, below)
  // torch.nn.modules.batchnorm.BatchNorm2d and torch.nn.modules.BatchNorm2d are torch.nn.BatchNorm2d;
  // intermediate module paths (torch.nn.modules.batchnorm) stay as they are so attribute chains still resolve
  [/^torch\.nn\.modules\.(?:[a-z_]+\.)?([A-Z]\w*)$/, 'torch.nn.$1'],
];

/** Every alias pattern starts with this: a plain prefix test rejects most names far faster than the expressions. */
const ALIAS_PREFIX = 'torch.nn.modules.';

export function canonical(q: string): string {
  if (!q.startsWith(ALIAS_PREFIX)) return q;
  for (const [re, to] of ALIASES) if (re.test(q)) return q.replace(re, to);
  return q;
}

export function layerSpec(q: string): LayerSpec | undefined {
  return byType.get(canonical(q));
}

/** Is this a torch.nn class we construct as a layer (known signature or any other capitalised torch.nn name)? */
export function isTorchLayerClass(q: string): boolean {
  // every catalogued type and every name the test below accepts is under torch.nn (asked for every library call)
  if (!q.startsWith('torch.nn.')) return false;
  const c = canonical(q);
  if (byType.has(c)) return true;
  const m = /^torch\.nn\.([A-Z][A-Za-z0-9]*)$/.exec(c);
  return !!m && !CONTAINERS.has(c) && !['Module', 'Parameter', 'ParameterList', 'ParameterDict'].includes(m[1]);
}

export function familyOf(type: string): Family {
  return byType.get(type)?.family ?? 'other';
}

/** The norm families that hold running or batch statistics per channel. */
export const BATCH_STAT_FAMILIES: ReadonlySet<Family> = new Set(['batchnorm', 'syncbatchnorm']);
export const NORM_FAMILIES: ReadonlySet<Family> = new Set(['batchnorm', 'syncbatchnorm', 'instancenorm', 'groupnorm', 'layernorm']);
export const DROPOUT_FAMILIES: ReadonlySet<Family> = new Set(['dropout', 'alphadropout']);

/** Layers whose output has the channel count of their input. */
export const CHANNEL_PRESERVING: ReadonlySet<Family> = new Set(['activation', 'selu', 'dropout', 'alphadropout', 'pool', 'batchnorm', 'syncbatchnorm', 'instancenorm', 'groupnorm', 'layernorm']);

/** torch.nn.functional / torch functions that keep the channel layout of their first argument. */
export const CHANNEL_PRESERVING_FUNCTIONS = new Set(
  ['relu', 'relu6', 'relu_', 'elu', 'selu', 'gelu', 'silu', 'mish', 'leaky_relu', 'sigmoid', 'tanh', 'hardswish', 'dropout', 'dropout1d', 'dropout2d', 'dropout3d', 'alpha_dropout', 'feature_alpha_dropout', 'max_pool1d', 'max_pool2d', 'max_pool3d', 'avg_pool1d', 'avg_pool2d', 'avg_pool3d', 'adaptive_avg_pool2d', 'adaptive_max_pool2d', 'interpolate'].flatMap((n) => [`torch.nn.functional.${n}`, `torch.${n}`]),
);

/** Library constructors that build whole networks known to contain mode-dependent layers (BatchNorm, dropout, stochastic
 * depth). torchvision ViTs are left out: by default their dropout is 0 and they normalise with LayerNorm. */
export function isKnownCaringConstructor(q: string): boolean {
  return /^torchvision\.models\.(resnet|resnext|wide_resnet|vgg\d+_bn|densenet|mobilenet|efficientnet|regnet|convnext|inception|googlenet|shufflenet|mnasnet|squeezenet|alexnet|swin_|maxvit)/.test(q) ||
    /^torchvision\.models\.(segmentation|detection)\./.test(q);
}

/** torch.nn's private base classes that `isinstance` checks name, by the families of their public subclasses. */
const PRIVATE_BASES: Record<string, ReadonlySet<Family>> = {
  'torch.nn._NormBase': new Set(['batchnorm', 'syncbatchnorm', 'instancenorm']),
  'torch.nn._BatchNorm': new Set(['batchnorm', 'syncbatchnorm']),
  'torch.nn._InstanceNorm': new Set(['instancenorm']),
  'torch.nn._ConvNd': new Set(['conv', 'convtranspose']),
  'torch.nn._ConvTransposeNd': new Set(['convtranspose']),
  'torch.nn._DropoutNd': new Set(['dropout', 'alphadropout']),
};

/** `torch.nn.batchnorm._BatchNorm` (what `nn.modules.batchnorm._BatchNorm` resolves to step by step) → `torch.nn._BatchNorm`. */
function classPath(q: string): string {
  return canonical(q).replace(/^torch\.nn\.(?:modules\.)?[a-z_]+\.(?=_?[A-Z])/, 'torch.nn.');
}

/**
 * Whether torch.nn class `type` is `base` or a subclass of it (torch/nn/modules/*.py class statements):
 * undefined when either class is one the catalog does not describe.
 */
export function isTorchSubclass(type: string, base: string): boolean | undefined {
  const t = classPath(type);
  const b = classPath(base);
  if (t === b || b === 'torch.nn.Module') return true;
  const spec = byType.get(t);
  if (!spec) return CONTAINERS.has(t) && isKnownTorchClass(b) ? false : undefined;
  // LazyLinear(LazyModuleMixin, Linear) and LazyConv2d(..., Conv2d) subclass their eager class; LazyBatchNorm2d does not
  if (t.startsWith('torch.nn.Lazy') && spec.family !== 'batchnorm' && b === `torch.nn.${t.slice('torch.nn.Lazy'.length)}`) return true;
  const priv = PRIVATE_BASES[b];
  if (priv) return priv.has(spec.family);
  return isKnownTorchClass(b) ? false : undefined;
}

/** A torch.nn class the catalog describes (layer, container, or private base). */
export function isKnownTorchClass(q: string): boolean {
  const c = classPath(q);
  return byType.has(c) || CONTAINERS.has(c) || c in PRIVATE_BASES;
}
