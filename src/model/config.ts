// defines: ReaderConfig (the encoder's shape, plain data), PRESETS, presetConfig,
// validateConfig, configFromHf / configToHf (HF-style `config.json`), parameterShapes,
// paramCount.
//
// Plain data only: a config passes through postMessage and IndexedDB unchanged, and is
// what a checkpoint's `config.json` holds (in the HF key spelling, see configToHf).

/** The two activations the engine, the ONNX export and the PyTorch reference know. */
export type Activation =
  /** exact GELU, 0.5·x·(1 + erf(x/√2)) (Hendrycks & Gimpel 2016) — BERT's own */
  | 'gelu'
  /** x·σ(1.702x), the sigmoid approximation from the same paper; XNNPACK-fast on wasm */
  | 'gelu_sigmoid';

/** The word-match features a reader reads (ReaderConfig.questionMatch). */
export type QuestionMatch = 'words' | 'words+sentence' | 'words+sentence+kind';

/** Token-type rows each level needs: question, context, and the match types. */
export const MATCH_TYPES: Record<QuestionMatch, number> = { words: 3, 'words+sentence': 5, 'words+sentence+kind': 9 };

export interface ReaderConfig {
  /** rows of the word-embedding table; take it from the tokenizer's vocabulary */
  vocabSize: number;
  /** H, the width of every token's hidden state */
  hiddenSize: number;
  /** L, encoder layers */
  numLayers: number;
  /** N, attention heads; H must be a multiple of N (head size D = H / N) */
  numHeads: number;
  /** I, the feed-forward inner width (BERT uses 4·H) */
  intermediateSize: number;
  /** P, rows of the position-embedding table: the longest sequence the model can read */
  maxPositions: number;
  /** rows of the token-type table (question = 0, context = 1) */
  typeVocabSize: number;
  /** dropout on embeddings, attention output and feed-forward output while training */
  hiddenDropout: number;
  /** dropout on the attention probabilities while training */
  attentionDropout: number;
  /** ε inside every LayerNorm's square root */
  layerNormEps: number;
  activation: Activation;
  /** σ of the truncated-normal initialisation (cut at ±2σ) */
  initStd: number;
  /**
   * Word-match features carried in BERT's own token-type input, so the architecture, the
   * checkpoint naming and the ONNX graph stay BERT's (src/text/features.ts computes them):
   *   'words'           context words that also occur in the question get token type 2
   *                     instead of 1 (typeVocabSize ≥ 3): the exact-match feature of DrQA
   *                     (Chen et al. 2017, "Reading Wikipedia to Answer Open-Domain Questions")
   *   'words+sentence'  also, the tokens of the sentence that matches the question best get
   *                     3 (not matched) or 4 (matched) (typeVocabSize ≥ 5)
   *   'words+sentence+kind'  also, tokens in a span of the kind the question asks for
   *                     (src/text/answer-kinds.ts) get 4 more: 5–8 (typeVocabSize ≥ 9)
   * config.json: "spanwright_question_match". Absent (as in every checkpoint from
   * elsewhere, and configs saved before it existed) means off: plain BERT inputs.
   */
  questionMatch?: QuestionMatch;
  /**
   * How this reader's spans are best decoded, chosen on its own training questions when it
   * was fine-tuned (ReaderSession.fineTune): the no-answer cut (src/eval/span-choice.ts
   * nullThreshold) and the type-aware decoding bonus (kindBonus). Evaluation, prediction and
   * questions use them unless told otherwise. config.json: "spanwright_decoding":
   * {"null_threshold", "kind_bonus"}. Absent means the neutral decoding: cut 0, no bonus.
   */
  decoding?: DecodingChoice;
}

/** The decoding settings a fine-tuned reader carries (ReaderConfig.decoding). */
export interface DecodingChoice {
  /** predict "" when null score − best span score exceeds this */
  nullThreshold: number;
  /** added to the score of a span of the kind the question asks for; ≥ 0 */
  kindBonus: number;
}

/** BERT-base's values (Devlin et al. 2019, and its published `config.json`). */
export const DEFAULT_CONFIG: ReaderConfig = {
  vocabSize: 30522, // BERT's uncased English WordPiece vocabulary; presets override it
  hiddenSize: 768, // BERT-base
  numLayers: 12, // BERT-base
  numHeads: 12, // BERT-base, D = 64
  intermediateSize: 3072, // 4·H, BERT-base
  maxPositions: 512, // BERT's pretraining length
  typeVocabSize: 2, // question / context
  hiddenDropout: 0.1, // BERT's pretraining and fine-tuning value
  attentionDropout: 0.1, // BERT's pretraining and fine-tuning value
  layerNormEps: 1e-12, // BERT's published config.json
  activation: 'gelu', // exact GELU, as BERT
  initStd: 0.02, // BERT's initializer_range
  // questionMatch absent: off, plain BERT inputs, as every checkpoint from elsewhere expects
};

export type PresetName = 'tiny' | 'small';

/** Sizes small enough to train on a laptop CPU. Only what differs from the default. */
export const PRESETS: Record<PresetName, Partial<ReaderConfig>> = {
  // 2 layers, H 128: the size of the shipped base reader
  tiny: { hiddenSize: 128, numLayers: 2, numHeads: 2, intermediateSize: 512 },
  // 4 layers, H 256: slower, more capacity
  small: { hiddenSize: 256, numLayers: 4, numHeads: 4, intermediateSize: 1024 },
};

/** A preset, with the vocabulary size taken from the tokenizer that will feed it. */
export function presetConfig(name: PresetName, vocabSize: number, overrides: Partial<ReaderConfig> = {}): ReaderConfig {
  const preset = PRESETS[name];
  if (preset === undefined) throw new Error(`presetConfig: unknown preset "${name}" (known: ${Object.keys(PRESETS).join(', ')})`);
  const config: ReaderConfig = { ...DEFAULT_CONFIG, ...preset, vocabSize, ...overrides };
  validateConfig(config);
  return config;
}

/**
 * Throws one error listing every bad field, each with its value and what was expected.
 * `source` names where the config came from (a file name) for the message; `names` the
 * fields as that file spells them (configFromHf: `num_hidden_layers`, not `numLayers`).
 */
export function validateConfig(config: ReaderConfig, source = 'config', names: Partial<Record<keyof ReaderConfig, string>> = {}): void {
  const problems: string[] = [];
  const name = (field: keyof ReaderConfig): string => names[field] ?? field;
  const positiveInt = (field: keyof ReaderConfig): void => {
    const v = config[field];
    if (typeof v !== 'number' || !Number.isInteger(v) || v <= 0)
      problems.push(`${name(field)} must be a positive integer, got ${JSON.stringify(v)}`);
  };
  const probability = (field: keyof ReaderConfig): void => {
    const v = config[field];
    if (typeof v !== 'number' || !(v >= 0 && v < 1)) problems.push(`${name(field)} must be a number in [0, 1), got ${JSON.stringify(v)}`);
  };
  const positiveNumber = (field: keyof ReaderConfig): void => {
    const v = config[field];
    if (typeof v !== 'number' || !Number.isFinite(v) || v <= 0)
      problems.push(`${name(field)} must be a positive number, got ${JSON.stringify(v)}`);
  };
  for (const f of ['vocabSize', 'hiddenSize', 'numLayers', 'numHeads', 'intermediateSize', 'maxPositions', 'typeVocabSize'] as const)
    positiveInt(f);
  // sane bounds, checked before anything is built from them: a config of a million layers
  // would exhaust memory long before its weights were found missing (the largest
  // BERT-family checkpoints have 48 layers, hidden 4096, vocabularies of 250 000, from memory)
  for (const [f, max] of SIZE_LIMITS) {
    const v = config[f];
    if (Number.isInteger(v) && v > max) problems.push(`${name(f)} ${v} is beyond what this engine reads (at most ${max})`);
  }
  probability('hiddenDropout');
  probability('attentionDropout');
  positiveNumber('layerNormEps');
  positiveNumber('initStd');
  if (config.activation !== 'gelu' && config.activation !== 'gelu_sigmoid') {
    problems.push(`${name('activation')} must be "gelu" or "gelu_sigmoid", got ${JSON.stringify(config.activation)}`);
  }
  if (config.questionMatch !== undefined && !(config.questionMatch in MATCH_TYPES)) {
    problems.push(
      `${name('questionMatch')} must be "words", "words+sentence" or "words+sentence+kind", got ${JSON.stringify(config.questionMatch)}`,
    );
  } else if (config.questionMatch && config.typeVocabSize < MATCH_TYPES[config.questionMatch]) {
    problems.push(
      `${name('questionMatch')} "${config.questionMatch}" needs ${name('typeVocabSize')} of at least ${MATCH_TYPES[config.questionMatch]}, got ${config.typeVocabSize}`,
    );
  }
  if (config.decoding !== undefined) {
    const d = config.decoding as Partial<DecodingChoice> | null;
    if (typeof d !== 'object' || d === null) problems.push(`${name('decoding')} must be an object, got ${JSON.stringify(d)}`);
    else {
      if (typeof d.nullThreshold !== 'number' || !Number.isFinite(d.nullThreshold))
        problems.push(`${name('decoding')}.null_threshold must be a finite number, got ${JSON.stringify(d.nullThreshold)}`);
      if (typeof d.kindBonus !== 'number' || !Number.isFinite(d.kindBonus) || d.kindBonus < 0)
        problems.push(`${name('decoding')}.kind_bonus must be a number ≥ 0, got ${JSON.stringify(d.kindBonus)}`);
    }
  }
  if (
    Number.isInteger(config.hiddenSize) &&
    Number.isInteger(config.numHeads) &&
    config.numHeads > 0 &&
    config.hiddenSize % config.numHeads !== 0
  ) {
    problems.push(`${name('hiddenSize')} (${config.hiddenSize}) must be a multiple of ${name('numHeads')} (${config.numHeads})`);
  }
  if (problems.length > 0) throw new Error(`${source}: invalid reader config: ${problems.join('; ')}`);
}

/** The largest value each size may take (far above any encoder a CPU can train). */
const SIZE_LIMITS: ReadonlyArray<
  [
    keyof ReaderConfig & ('vocabSize' | 'hiddenSize' | 'numLayers' | 'numHeads' | 'intermediateSize' | 'maxPositions' | 'typeVocabSize'),
    number,
  ]
> = [
  ['vocabSize', 1_000_000],
  ['hiddenSize', 8192],
  ['numLayers', 96],
  ['numHeads', 256],
  ['intermediateSize', 65_536],
  ['maxPositions', 65_536],
  ['typeVocabSize', 64],
];

/** HF `hidden_act` spellings this engine can run, to our activation names. */
const HF_ACTIVATIONS: Record<string, Activation> = {
  gelu: 'gelu', // exact erf GELU in HF's BERT
  gelu_sigmoid: 'gelu_sigmoid', // our own name; written back as-is
  quick_gelu: 'gelu_sigmoid', // HF's name for x·σ(1.702x)
};

/**
 * Reads an HF-style `config.json` (already parsed). Missing optional keys take BERT's
 * defaults; missing sizes, unknown activations and bad values are errors naming `file`
 * and the key.
 */
export function configFromHf(json: unknown, file = 'config.json'): ReaderConfig {
  if (typeof json !== 'object' || json === null || Array.isArray(json)) throw new Error(`${file}: expected a JSON object`);
  const o = json as Record<string, unknown>;
  const required = (key: string): number => {
    const v = o[key];
    if (v === undefined) throw new Error(`${file}: missing required key "${key}"`);
    if (typeof v !== 'number') throw new Error(`${file}: "${key}" must be a number, got ${JSON.stringify(v)}`);
    return v;
  };
  const optional = (key: string, fallback: number): number => {
    const v = o[key];
    if (v === undefined || v === null) return fallback;
    if (typeof v !== 'number') throw new Error(`${file}: "${key}" must be a number, got ${JSON.stringify(v)}`);
    return v;
  };
  let activation: Activation = DEFAULT_CONFIG.activation;
  if (o.hidden_act !== undefined) {
    const found = typeof o.hidden_act === 'string' ? HF_ACTIVATIONS[o.hidden_act] : undefined;
    if (found === undefined) {
      throw new Error(
        `${file}: "hidden_act" ${JSON.stringify(o.hidden_act)} is not supported (supported: ${Object.keys(HF_ACTIVATIONS).join(', ')})`,
      );
    }
    activation = found;
  }
  const match = o.spanwright_question_match;
  if (match !== undefined && match !== null && !(typeof match === 'string' && match in MATCH_TYPES)) {
    throw new Error(
      `${file}: "spanwright_question_match" must be "words", "words+sentence" or "words+sentence+kind", got ${JSON.stringify(match)}`,
    );
  }
  const config: ReaderConfig = {
    vocabSize: required('vocab_size'),
    hiddenSize: required('hidden_size'),
    numLayers: required('num_hidden_layers'),
    numHeads: required('num_attention_heads'),
    intermediateSize: required('intermediate_size'),
    maxPositions: optional('max_position_embeddings', DEFAULT_CONFIG.maxPositions),
    typeVocabSize: optional('type_vocab_size', DEFAULT_CONFIG.typeVocabSize),
    hiddenDropout: optional('hidden_dropout_prob', DEFAULT_CONFIG.hiddenDropout),
    attentionDropout: optional('attention_probs_dropout_prob', DEFAULT_CONFIG.attentionDropout),
    layerNormEps: optional('layer_norm_eps', DEFAULT_CONFIG.layerNormEps),
    activation,
    initStd: optional('initializer_range', DEFAULT_CONFIG.initStd),
    ...(typeof match === 'string' ? { questionMatch: match as QuestionMatch } : {}),
    ...decodingFromHf(o.spanwright_decoding, file),
  };
  validateConfig(config, file, HF_NAMES);
  return config;
}

/** Each field as config.json spells it (configFromHf, configToHf). */
const HF_NAMES: Record<keyof ReaderConfig, string> = {
  vocabSize: 'vocab_size',
  hiddenSize: 'hidden_size',
  numLayers: 'num_hidden_layers',
  numHeads: 'num_attention_heads',
  intermediateSize: 'intermediate_size',
  maxPositions: 'max_position_embeddings',
  typeVocabSize: 'type_vocab_size',
  hiddenDropout: 'hidden_dropout_prob',
  attentionDropout: 'attention_probs_dropout_prob',
  layerNormEps: 'layer_norm_eps',
  activation: 'hidden_act',
  initStd: 'initializer_range',
  questionMatch: 'spanwright_question_match',
  decoding: 'spanwright_decoding',
};

/** `spanwright_decoding` of a config.json: absent or null is none; anything else must be the object configToHf writes. */
function decodingFromHf(v: unknown, file: string): { decoding?: DecodingChoice } {
  if (v === undefined || v === null) return {};
  if (typeof v !== 'object' || Array.isArray(v))
    throw new Error(`${file}: "spanwright_decoding" must be an object {"null_threshold", "kind_bonus"}, got ${JSON.stringify(v)}`);
  const o = v as Record<string, unknown>;
  // validateConfig names a bad value; a missing kind bonus is none
  return { decoding: { nullThreshold: o.null_threshold as number, kindBonus: (o.kind_bonus ?? 0) as number } };
}

/** The HF-style `config.json` object for a checkpoint directory. */
export function configToHf(config: ReaderConfig): Record<string, unknown> {
  return {
    architectures: ['BertForQuestionAnswering'],
    model_type: 'bert',
    vocab_size: config.vocabSize,
    hidden_size: config.hiddenSize,
    num_hidden_layers: config.numLayers,
    num_attention_heads: config.numHeads,
    intermediate_size: config.intermediateSize,
    max_position_embeddings: config.maxPositions,
    type_vocab_size: config.typeVocabSize,
    hidden_dropout_prob: config.hiddenDropout,
    attention_probs_dropout_prob: config.attentionDropout,
    layer_norm_eps: config.layerNormEps,
    hidden_act: config.activation === 'gelu' ? 'gelu' : 'quick_gelu',
    initializer_range: config.initStd,
    position_embedding_type: 'absolute',
    // written only when on, so a plain BERT config stays plain
    ...(config.questionMatch ? { spanwright_question_match: config.questionMatch } : {}),
    ...(config.decoding
      ? { spanwright_decoding: { null_threshold: config.decoding.nullThreshold, kind_bonus: config.decoding.kindBonus } }
      : {}),
  };
}

/** The config without its decoding settings: a reader trained further has not been measured with them. */
export function withoutDecoding(config: ReaderConfig): ReaderConfig {
  if (config.decoding === undefined) return config;
  const { decoding: _dropped, ...rest } = config;
  return rest;
}

/** Which part of the model a parameter belongs to; heads may be missing from a checkpoint. */
export type ParamPart = 'encoder' | 'span_head' | 'mlm_head';

export interface ParamSpec {
  /** checkpoint layout: Linear weights `[out, in]`, as PyTorch stores them */
  shape: number[];
  part: ParamPart;
  /** `weight` of a Linear layer, `[out, in]` as everywhere: the products read it as x·Wᵀ */
  linear: boolean;
  /** how a fresh parameter starts */
  init: 'normal' | 'zeros' | 'ones';
}

/**
 * Every parameter the engine owns, in the common BERT checkpoint naming (DEVELOPERS.md,
 * "Weights"), in a fixed order. The single source for init, loading and counting.
 */
export function parameterShapes(config: ReaderConfig): Map<string, ParamSpec> {
  const { vocabSize: V, hiddenSize: H, intermediateSize: I, maxPositions: P, typeVocabSize: Y } = config;
  const specs = new Map<string, ParamSpec>();
  const table = (name: string, shape: number[], part: ParamPart = 'encoder'): void => {
    specs.set(name, { shape, part, linear: false, init: 'normal' });
  };
  const linear = (name: string, out: number, inp: number, part: ParamPart = 'encoder'): void => {
    specs.set(`${name}.weight`, { shape: [out, inp], part, linear: true, init: 'normal' });
    specs.set(`${name}.bias`, { shape: [out], part, linear: false, init: 'zeros' });
  };
  const layerNorm = (name: string, part: ParamPart = 'encoder'): void => {
    specs.set(`${name}.weight`, { shape: [H], part, linear: false, init: 'ones' });
    specs.set(`${name}.bias`, { shape: [H], part, linear: false, init: 'zeros' });
  };
  table('bert.embeddings.word_embeddings.weight', [V, H]);
  table('bert.embeddings.position_embeddings.weight', [P, H]);
  table('bert.embeddings.token_type_embeddings.weight', [Y, H]);
  layerNorm('bert.embeddings.LayerNorm');
  for (let i = 0; i < config.numLayers; i++) {
    const layer = `bert.encoder.layer.${i}`;
    linear(`${layer}.attention.self.query`, H, H);
    linear(`${layer}.attention.self.key`, H, H);
    linear(`${layer}.attention.self.value`, H, H);
    linear(`${layer}.attention.output.dense`, H, H);
    layerNorm(`${layer}.attention.output.LayerNorm`);
    linear(`${layer}.intermediate.dense`, I, H);
    linear(`${layer}.output.dense`, H, I);
    layerNorm(`${layer}.output.LayerNorm`);
  }
  linear('qa_outputs', 2, H, 'span_head');
  linear('cls.predictions.transform.dense', H, H, 'mlm_head');
  layerNorm('cls.predictions.transform.LayerNorm', 'mlm_head');
  specs.set('cls.predictions.bias', { shape: [V], part: 'mlm_head', linear: false, init: 'zeros' });
  return specs;
}

/** Parameters the engine owns, by part (the MLM decoder is tied, so not counted twice). */
export function paramCount(config: ReaderConfig): { encoder: number; spanHead: number; mlmHead: number; total: number } {
  const counts = { encoder: 0, span_head: 0, mlm_head: 0 };
  for (const spec of parameterShapes(config).values()) counts[spec.part] += spec.shape.reduce((a, b) => a * b, 1);
  return {
    encoder: counts.encoder,
    spanHead: counts.span_head,
    mlmHead: counts.mlm_head,
    total: counts.encoder + counts.span_head + counts.mlm_head,
  };
}
