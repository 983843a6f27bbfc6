// defines: ModelCardInfo, renderModelCard, CAUTION — the Markdown card that travels with an
// exported model (the "model card" of Mitchell et al. 2019): what it was built from, how,
// how well it did, which files hold what, and how far to trust its answers.

import type { ReaderConfig } from '../model/config.js';
import type { SplitScores, SquadScores } from '../eval/squad-metric.js';
import { readerWarnings } from '../eval/reader-warnings.js';
import type { Int8TensorReport } from './int8.js';

/** Shown on every card, and by the UI beside every answer. */
export const CAUTION =
  'Answers from this model are spans of text copied out of the documents it is given. ' +
  'They can be wrong, incomplete, or correct words taken out of their context. ' +
  'Check every answer against its source before it informs any legal, medical or safety decision.';

export interface Int8Drift {
  /** how many sequences the engine ran, and of what */
  probe: string;
  /** max |start/end logit (int8) − start/end logit (fp32)| */
  maxAbsLogitDiff: number;
  /** max − min of the fp32 logits over the probe, for scale */
  logitSpread: number;
  /** how often the argmax start or end position changed, of all probed sequences */
  argmaxChanges?: { changed: number; total: number };
}

export interface ModelCardInfo {
  /** the card's heading; default "Question-answering reader" */
  title?: string;
  /** where the starting weights came from (a name, a folder, "trained from scratch") */
  baseModel: string;
  config: ReaderConfig;
  dataset?: {
    /** src/data/hash.ts hashDataset */
    hash: string;
    records?: number;
    train?: number;
    validation?: number;
  };
  /** run settings as plain data (TrainConfig and friends); shown as JSON */
  settings?: object;
  metrics?: {
    /** validation scores at the decoder's default no-answer threshold (0) */
    withoutThreshold?: SquadScores;
    /** the same with the F1-best threshold applied */
    withThreshold?: SquadScores & { threshold: number };
    /** with the decoding saved in config.json (chosen on the training questions): what eval, predict and ask give */
    withSavedDecoding?: SquadScores & { nullThreshold: number; kindBonus: number };
  };
  /** ISO 8601 date of the export */
  date: string;
  /** files of the export, each with one line of description */
  files?: Array<{ name: string; description: string; bytes: number }>;
  int8?: {
    tensors: Int8TensorReport[];
    drift?: Int8Drift;
    /** validation scores of the dequantized int8 model beside fp32, when computed */
    accuracy?: { fp32: SquadScores; int8: SquadScores };
  };
  /** free sentences (load notices, caveats of this particular run) */
  notes?: string[];
}

const pct = (v: number | null | undefined): string => (v === null || v === undefined ? '–' : v.toFixed(2));

function scoreRows(label: string, s: SquadScores): string[] {
  const row = (part: string, x: SplitScores) => `| ${label} | ${part} | ${pct(x.em)} | ${pct(x.f1)} | ${x.total} |`;
  return [row('all', s), row('answerable', s.answerable), row('unanswerable', s.unanswerable)];
}

function formatBytes(n: number): string {
  if (n < 1024) return `${n} B`;
  if (n < 1024 * 1024) return `${(n / 1024).toFixed(1)} KiB`;
  return `${(n / (1024 * 1024)).toFixed(1)} MiB`;
}

export function renderModelCard(info: ModelCardInfo): string {
  const c = info.config;
  const out: string[] = [];
  out.push(`# ${info.title ?? 'Question-answering reader'}`, '');
  out.push(`> **Caution.** ${CAUTION}`, '');
  out.push(
    'An extractive reader: given a question and a passage it marks the span of the passage that answers, or says there is none. A BERT-family encoder (post-LayerNorm) with a start/end span head.',
    '',
  );

  out.push('## Provenance', '');
  out.push(`- Base model: ${info.baseModel}`);
  out.push(`- Exported: ${info.date}`);
  if (info.dataset) {
    out.push(`- Training data hash (SHA-256 of the canonical record set): \`${info.dataset.hash}\``);
    const sizes = [
      info.dataset.records !== undefined ? `${info.dataset.records} records` : null,
      info.dataset.train !== undefined ? `${info.dataset.train} for training` : null,
      info.dataset.validation !== undefined ? `${info.dataset.validation} for validation` : null,
    ].filter((s) => s !== null);
    if (sizes.length > 0) out.push(`- Data size: ${sizes.join(', ')}`);
  } else {
    out.push('- Training data: not recorded (this export did not come from a training run)');
  }
  out.push('');

  out.push('## Architecture', '');
  out.push(`| layers | hidden | heads | feed-forward | max positions | vocabulary | activation | LayerNorm ε |`);
  out.push(`|---|---|---|---|---|---|---|---|`);
  out.push(
    `| ${c.numLayers} | ${c.hiddenSize} | ${c.numHeads} | ${c.intermediateSize} | ${c.maxPositions} | ${c.vocabSize} | ${c.activation === 'gelu' ? 'GELU (erf)' : 'x·σ(1.702x)'} | ${c.layerNormEps} |`,
    '',
  );

  if (info.settings) {
    out.push('## Settings', '', '```json', JSON.stringify(info.settings, null, 2), '```', '');
  }

  out.push('## Validation scores', '');
  const m = info.metrics;
  if (m && (m.withoutThreshold || m.withThreshold || m.withSavedDecoding)) {
    out.push('Exact match and F1 in percent, by the SQuAD 2.0 evaluation rules.', '');
    out.push('| decoding | questions | EM | F1 | count |', '|---|---|---|---|---|');
    const saved = m.withSavedDecoding;
    if (saved) out.push(...scoreRows(`saved: threshold ${saved.nullThreshold.toFixed(3)}, kind bonus ${saved.kindBonus}`, saved));
    if (m.withoutThreshold) out.push(...scoreRows('no-answer threshold 0', m.withoutThreshold));
    if (m.withThreshold) out.push(...scoreRows(`best threshold ${m.withThreshold.threshold.toFixed(3)}`, m.withThreshold));
    out.push('');
    if (saved)
      out.push(
        'The saved decoding (`spanwright_decoding` in config.json: the no-answer threshold and the bonus for a span of the kind the question asks for) was chosen on the training questions; evaluation, prediction and questions use it.',
        '',
      );
    if (m.withThreshold)
      out.push('The best threshold was chosen on the same validation questions, so its scores are optimistic for new questions.', '');
    const scored = saved ?? m.withThreshold ?? m.withoutThreshold;
    if (scored) for (const w of readerWarnings(scored)) out.push(`**${w.replace(/^warning: /, 'Warning: ')}**`, '');
  } else {
    out.push('Not measured for this export.', '');
  }

  if (info.int8) {
    out.push('## int8 weights', '');
    out.push(
      'Weight-only int8, per output channel, symmetric: every 2-D `.weight` tensor (each Linear weight in the `[out, in]` layout, each embedding table) ' +
        'is stored row by row as `q = round(w / scale)` in [−127, 127] with `scale = max|row| / 127`. ' +
        'In `model.int8.safetensors` the tensor `<name>` is I8 with its original shape and `<name>.scale` is F32 `[rows]`; ' +
        'dequantize with `w = q · scale[row]`. Biases and LayerNorm stay float32.',
      '',
    );
    const worst = info.int8.tensors.reduce(
      (a, t) => (t.maxAbsError > a.maxAbsError ? t : a),
      info.int8.tensors[0] ?? { name: '–', maxAbsError: 0, bound: 0, maxAbs: 0, shape: [] },
    );
    out.push(
      `Largest weight error: ${worst.maxAbsError.toExponential(3)} in \`${worst.name}\` (bound scale/2 = ${worst.bound.toExponential(3)}).`,
      '',
    );
    if (info.int8.drift) {
      const d = info.int8.drift;
      out.push(
        `Logit drift on ${d.probe}: max |Δ| = ${d.maxAbsLogitDiff.toExponential(3)} against a logit spread of ${d.logitSpread.toFixed(3)}.`,
      );
      if (d.argmaxChanges)
        out.push(`The most likely start or end position changed in ${d.argmaxChanges.changed} of ${d.argmaxChanges.total} sequences.`);
      out.push('');
    }
    if (info.int8.accuracy) {
      out.push('| weights | questions | EM | F1 | count |', '|---|---|---|---|---|');
      out.push(...scoreRows('fp32', info.int8.accuracy.fp32), ...scoreRows('int8 (dequantized)', info.int8.accuracy.int8), '');
    } else {
      out.push('EM/F1 of the int8 model on validation questions: not measured in this export (it needs validation data).', '');
    }
    out.push(
      'ONNX: in `model.int8.onnx` each quantized weight is an INT8 initializer followed by `DequantizeLinear` on its output channel. ' +
        "onnxruntime's default optimizations may fuse these into int8 products that also quantize the activations, which is faster and slightly less exact; " +
        'the session option `session.qdq_matmulnbits_accuracy_level = "0"` keeps the products in float.',
      '',
    );
    out.push(
      '<details><summary>Per-tensor error</summary>',
      '',
      '| tensor | shape | largest weight | max error | bound |',
      '|---|---|---|---|---|',
    );
    for (const t of info.int8.tensors)
      out.push(
        `| \`${t.name}\` | ${t.shape.join('×')} | ${t.maxAbs.toExponential(3)} | ${t.maxAbsError.toExponential(3)} | ${t.bound.toExponential(3)} |`,
      );
    out.push('', '</details>', '');
  }

  if (info.files && info.files.length > 0) {
    out.push('## Files', '', '| file | size | holds |', '|---|---|---|');
    for (const f of info.files) out.push(`| \`${f.name}\` | ${formatBytes(f.bytes)} | ${f.description} |`);
    out.push('');
    out.push(
      'Weights use the common BERT checkpoint naming, Linear weights `[out, in]`. ONNX inputs: `input_ids`, `attention_mask`, `token_type_ids` (int64 `[batch, sequence]`); ' +
        'outputs `start_logits`, `end_logits` (float `[batch, sequence]`). Input layout: `[CLS] question [SEP] passage [SEP]`, token type 0 for the question part and 1 for the passage.',
      '',
    );
  }

  if (info.notes && info.notes.length > 0) {
    out.push('## Notes', '', ...info.notes.map((n) => `- ${n}`), '');
  }

  out.push('## Limits', '');
  out.push(
    '- The model can only copy a span from the passage it is given; it cannot answer from knowledge of its own, combine passages, or say where the passage is wrong.',
  );
  out.push(
    '- Its scores were measured on the validation questions above; questions unlike them (other wording, other subjects, longer passages) can score much worse.',
  );
  out.push(`- ${CAUTION}`, '');
  return out.join('\n');
}
