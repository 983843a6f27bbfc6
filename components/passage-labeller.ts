// <passage-labeller> — labelling by hand: add plain-text passages (pasted, or loaded
// from .txt files), pick one, select the answer in its text (mouse, or Shift with the
// arrow keys: the text box takes a caret but refuses every edit), with the answers
// already given highlighted behind the text; type the question, or mark it unanswerable;
// edit and delete questions, with undo in several steps (src/session/edit-history.ts:
// the note names what it would undo and goes once that no longer applies); each question
// is marked as training or validation. A message about a missing answer or question
// shows beside the button that needs it. Every question is checked by
// src/data/validate.ts before it is kept, and the text is shown only as text (a
// <textarea> and lit bindings).
// Events out: dataset-change {dataset, edits} (edits: the undo history after the change).
import { LitElement, css, html } from 'lit';
import { customElement, property, state } from 'lit/decorators.js';
import type { QARecord } from '../src/data/record.js';
import { normaliseLineBreaks, validateQARecords } from '../src/data/validate.js';
import { describeEdit, liveHistory, pushEdit, undoEdit, type QuestionEdit } from '../src/session/edit-history.js';
import type { Mark } from './marked-passage.js';
import './marked-passage.js';
import { screenStyles } from './shared-styles.js';
import { emptyDataset, type Dataset } from './workbench-db.js';

/** A passage id from a title: lower case, letters, digits and dashes. */
function slug(title: string): string {
  return title
    .normalize('NFKD')
    .toLowerCase()
    .replace(/[^\p{L}\p{N}]+/gu, '-')
    .replace(/^-+|-+$/g, '')
    .slice(0, 48);
}

function uniqueId(base: string, taken: ReadonlySet<string>): string {
  if (!taken.has(base)) return base;
  for (let n = 2; ; n++) if (!taken.has(`${base}-${n}`)) return `${base}-${n}`;
}

@customElement('passage-labeller')
export class PassageLabeller extends LitElement {
  static override styles = [
    screenStyles,
    css`
      /* the passage: a text box over a copy of its text with the answers marked; both lay
         the text out alike (font, padding, border, wrapping), and the box grows to its text */
      .passage-wrap {
        position: relative;
        background: #fff;
        border-radius: 4px;
      }
      .passage,
      .passage-marks {
        font-family: ui-monospace, SFMono-Regular, Menlo, monospace;
        font-size: 0.9rem;
        line-height: 1.5;
        padding: 0.4rem 0.5rem;
        border: 1px solid transparent;
        box-sizing: border-box;
        white-space: pre-wrap;
        overflow-wrap: break-word;
        word-break: normal;
        margin: 0;
      }
      .passage {
        position: relative;
        z-index: 1;
        display: block;
        width: 100%;
        min-height: 6rem;
        field-sizing: content;
        resize: none;
        overflow: hidden;
        background: transparent;
        border-color: var(--line, #ccc);
        color: inherit;
      }
      .passage-marks {
        position: absolute;
        inset: 0;
        color: transparent;
        overflow: hidden;
        pointer-events: none;
      }
      .inline-message {
        color: var(--bad, #a3262a);
        font-weight: 600;
      }
      .answer {
        background: var(--gold, #f3df8f);
        padding: 0 0.2rem;
      }
      li.editing {
        outline: 2px solid var(--accent, #1f5f8b);
      }
      ul.questions {
        padding-left: 1.2rem;
      }
      ul.questions li {
        margin: 0.25rem 0;
      }
      .side {
        border: 1px solid var(--line, #ccc);
        border-radius: 999px;
        padding: 0 0.5rem;
        font-size: 0.8rem;
      }
      .side.validation {
        border-color: var(--accent, #1f5f8b);
        color: var(--accent, #1f5f8b);
      }
    `,
  ];

  /** the dataset: questions and passages */
  @property({ attribute: false }) collection: Dataset = emptyDataset();
  /** ids of the questions on the validation side of the current split; the rest train */
  @property({ attribute: false }) validationSide: ReadonlySet<string> = new Set();
  /** a question id to bring into view (its passage is selected) */
  @property({ attribute: false }) focusId: string | null = null;
  /** the undo history (oldest first), kept by the shell so it outlives a change of screen */
  @property({ attribute: false }) edits: QuestionEdit[] = [];

  @state() private passageId = '';
  @state() private answer: { start: number; end: number } | null = null;
  @state() private question = '';
  @state() private unanswerable = false;
  /** the question being edited, or null when adding */
  @state() private editing: string | null = null;
  /** a message beside the button that needs something: "use the selection" or "add / save" */
  @state() private inlineMessage: { at: 'selection' | 'save'; text: string } | null = null;
  @state() private newTitle = '';
  @state() private newText = '';

  override willUpdate(changed: Map<string, unknown>): void {
    if (changed.has('focusId') && this.focusId) {
      const r = this.collection.records.find((x) => x.id === this.focusId);
      if (r) this.startEdit(r);
    }
    // only a new collection can remove the chosen passage (one just added arrives with the next collection)
    const known = this.collection.passages.some((p) => p.id === this.passageId);
    if ((changed.has('collection') || this.passageId === '') && !known) this.passageId = this.collection.passages[0]?.id ?? '';
  }

  override render() {
    const passages = this.collection.passages;
    const passage = passages.find((p) => p.id === this.passageId);
    const counts = new Map<string, number>();
    for (const r of this.collection.records) counts.set(r.passageId, (counts.get(r.passageId) ?? 0) + 1);
    const questions = this.collection.records.filter((r) => r.passageId === this.passageId);
    return html`
      <section>
        <h3>Label passages</h3>
        <details ?open=${passages.length === 0}>
          <summary>Add a passage</summary>
          <div class="row">
            <label
              >Title
              <input id="new-title" .value=${this.newTitle} @input=${(e: Event) => (this.newTitle = (e.target as HTMLInputElement).value)}
            /></label>
            <label
              >or load text files <input id="passage-files" type="file" multiple accept=".txt,text/plain" @change=${this._onPassageFiles}
            /></label>
          </div>
          <label for="new-text">Passage text</label>
          <textarea
            id="new-text"
            rows="6"
            .value=${this.newText}
            @input=${(e: Event) => (this.newText = (e.target as HTMLTextAreaElement).value)}
          ></textarea>
          <button id="add-passage" @click=${this._onAddPassage} ?disabled=${this.newText.trim() === ''}>Add passage</button>
        </details>

        ${
          passages.length === 0
            ? html`<p class="muted">No passages yet: import questions above, or add a passage.</p>`
            : html`
                <div class="row spaced">
                  <label
                    >Passage
                    <select id="passage-select" @change=${this._onPickPassage}>
                      ${passages.map((p) => html`<option value=${p.id} ?selected=${p.id === this.passageId}>${p.title ?? p.id} (${counts.get(p.id) ?? 0} questions)</option>`)}
                    </select>
                  </label>
                </div>
                ${passage ? this.renderEditor(passage.text, questions) : ''}
              `
        }
        ${this.renderUndo()}
      </section>
    `;
  }

  /** The newest step that can still be undone, named with its passage, and how many more there are. */
  private renderUndo() {
    const live = liveHistory(this.edits, this.collection);
    const last = live.at(-1);
    if (!last) return '';
    const d = describeEdit(last);
    const passage = this.collection.passages.find((p) => p.id === d.passageId);
    const where = d.passageId === this.passageId ? '' : ` on the passage “${passage?.title ?? d.passageId}”`;
    return html`<p class="note" role="status" id="undo-note" data-verb=${d.verb}>
      ${d.verb[0]!.toUpperCase() + d.verb.slice(1)} “${d.question}”${where}.
      <button id="undo" @click=${this._onUndo}>Undo</button>
      ${live.length > 1 ? html`<span class="muted">${live.length - 1} earlier step(s) can be undone after it.</span>` : ''}
    </p>`;
  }

  private renderEditor(text: string, questions: QARecord[]) {
    const a = this.answer;
    const marks: Mark[] = questions
      .filter((r) => r.id !== this.editing)
      .flatMap((r) => r.answers.map((x) => ({ start: x.start, end: x.start + x.text.length, kind: 'gold' as const })));
    if (a && !this.unanswerable) marks.push({ ...a, kind: 'chosen' });
    const inline = (at: 'selection' | 'save') =>
      this.inlineMessage?.at === at
        ? html`<span class="inline-message" role="alert" id="${at}-message">${this.inlineMessage.text}</span>`
        : '';
    return html`
      <label for="passage-text"
        >Passage
        <span class="muted"
          >— answers already given are highlighted. Select the answer with the mouse, or move with the arrow keys and hold Shift to select
          (Ctrl or Alt with them: a word at a time).</span
        ></label
      >
      <div class="passage-wrap">
        <marked-passage class="passage-marks" aria-hidden="true" .text=${text} .marks=${marks}></marked-passage>
        <textarea
          id="passage-text"
          class="passage"
          aria-readonly="true"
          spellcheck="false"
          .value=${text}
          aria-describedby="answer-state"
          @beforeinput=${(e: InputEvent) => e.preventDefault()}
          @input=${this._onPassageInput}
        ></textarea>
      </div>
      <div class="row">
        <button id="use-selection" @click=${this._onUseSelection} ?disabled=${this.unanswerable}>Use the selection as the answer</button>
        ${inline('selection')}
        <span id="answer-state">
          ${
            this.unanswerable
              ? html`<em>unanswerable: the passage does not say</em>`
              : a
                ? html`Answer: <span class="answer">${text.slice(a.start, a.end)}</span>
                    <span class="muted">(characters ${a.start}–${a.end})</span>`
                : html`<span class="muted">no answer selected yet</span>`
          }
        </span>
      </div>
      <div class="row spaced">
        <label class="grow"
          >Question
          <input
            id="question-input"
            .value=${this.question}
            @input=${(e: Event) => (this.question = (e.target as HTMLInputElement).value)}
            @keydown=${this._onQuestionKey}
          />
        </label>
        <label
          ><input
            id="unanswerable-box"
            type="checkbox"
            .checked=${this.unanswerable}
            @change=${(e: Event) => (this.unanswerable = (e.target as HTMLInputElement).checked)}
          />
          unanswerable</label
        >
        <button id="save-question" class="primary" @click=${this._onSave}>${this.editing ? 'Save changes' : 'Add question'}</button>
        ${this.editing ? html`<button @click=${this._onCancelEdit}>Cancel</button>` : ''} ${inline('save')}
      </div>
      <ul class="questions" aria-label="Questions on this passage">
        ${questions.map(
          (r) =>
            html`<li class=${r.id === this.editing ? 'editing' : ''} data-id=${r.id}>
              <strong>${r.question}</strong> →
              ${r.unanswerable ? html`<em>unanswerable</em>` : html`<span class="answer">${r.answers[0]?.text ?? ''}</span>`}
              <span class="muted">${r.id}</span>
              ${
                this.validationSide.has(r.id)
                  ? html`<span class="side validation" data-side="validation">validation</span>`
                  : html`<span class="side" data-side="training">training</span>`
              }
              <button @click=${() => this.startEdit(r)} aria-label="Edit question ${r.id}">Edit</button>
              <button @click=${() => this._onDelete(r)} aria-label="Delete question ${r.id}">Delete</button>
            </li>`,
        )}
      </ul>
    `;
  }

  private emit(dataset: Dataset, edits: QuestionEdit[] = this.edits): void {
    this.dispatchEvent(new CustomEvent('dataset-change', { detail: { dataset, edits }, bubbles: true, composed: true }));
  }

  /** An edit the beforeinput guard could not stop (an input method's composition): the passage text is put back. */
  private _onPassageInput(e: Event): void {
    const box = e.target as HTMLTextAreaElement;
    const text = this.collection.passages.find((p) => p.id === this.passageId)?.text ?? '';
    if (box.value !== text) box.value = text;
  }

  private startEdit(r: QARecord): void {
    this.passageId = r.passageId;
    this.editing = r.id;
    this.question = r.question;
    this.unanswerable = r.unanswerable;
    const first = r.answers[0];
    this.answer = first ? { start: first.start, end: first.start + first.text.length } : null;
    this.inlineMessage = null;
  }

  private resetForm(): void {
    this.inlineMessage = null;
    this.editing = null;
    this.question = '';
    this.unanswerable = false;
    this.answer = null;
  }

  private addPassages(items: Array<{ title: string; text: string }>): void {
    const taken = new Set(this.collection.passages.map((p) => p.id));
    const passages = [...this.collection.passages];
    let last = '';
    for (const item of items) {
      const text = normaliseLineBreaks(item.text).trim();
      if (text === '') continue;
      const id = uniqueId(slug(item.title) || `passage-${passages.length + 1}`, taken);
      taken.add(id);
      passages.push({ id, text, title: item.title.trim() || undefined });
      last = id;
    }
    if (!last) return;
    this.passageId = last;
    this.resetForm();
    this.emit({ ...this.collection, passages });
  }

  private _onAddPassage(): void {
    this.addPassages([{ title: this.newTitle, text: this.newText }]);
    this.newTitle = '';
    this.newText = '';
  }

  private async _onPassageFiles(e: Event): Promise<void> {
    const input = e.target as HTMLInputElement;
    const files = [...(input.files ?? [])];
    this.addPassages(await Promise.all(files.map(async (f) => ({ title: f.name.replace(/\.txt$/i, ''), text: await f.text() }))));
    input.value = '';
  }

  private _onPickPassage(e: Event): void {
    this.passageId = (e.target as HTMLSelectElement).value;
    this.resetForm();
  }

  private _onUseSelection(): void {
    const box = this.renderRoot.querySelector('#passage-text') as HTMLTextAreaElement;
    let [start, end] = [box.selectionStart, box.selectionEnd];
    // leave out spaces caught at either edge of the selection
    while (start < end && /\s/.test(box.value[start]!)) start++;
    while (end > start && /\s/.test(box.value[end - 1]!)) end--;
    if (end <= start) {
      this.inlineMessage = {
        at: 'selection',
        text: 'Select the answer in the passage first (drag over it, or hold Shift and use the arrow keys).',
      };
      return;
    }
    this.answer = { start, end };
    this.inlineMessage = null;
  }

  private _onQuestionKey(e: KeyboardEvent): void {
    if (e.key === 'Enter') this._onSave();
  }

  private _onSave(): void {
    const passage = this.collection.passages.find((p) => p.id === this.passageId);
    if (!passage) return;
    const question = this.question.trim();
    if (question === '') {
      this.inlineMessage = { at: 'save', text: 'Type the question first.' };
      return;
    }
    if (!this.unanswerable && !this.answer) {
      this.inlineMessage = {
        at: 'save',
        text: 'Choose the answer first: select it in the passage and press “Use the selection as the answer”, or mark the question unanswerable.',
      };
      return;
    }
    const records = this.collection.records;
    const taken = new Set(records.map((r) => r.id));
    const id = this.editing ?? uniqueId(`${passage.id}-m${records.filter((r) => r.passageId === passage.id).length + 1}`, taken);
    const a = this.answer;
    const record: QARecord = {
      id,
      passageId: passage.id,
      context: passage.text,
      question,
      answers: this.unanswerable || !a ? [] : [{ text: passage.text.slice(a.start, a.end), start: a.start }],
      unanswerable: this.unanswerable,
    };
    const checked = validateQARecords([record], 'labelled question');
    const errors = checked.problems.filter((p) => p.severity === 'error');
    if (errors.length > 0 || checked.records.length === 0) {
      this.inlineMessage = { at: 'save', text: errors.map((p) => `${p.field}: ${p.message}`).join('; ') };
      return;
    }
    const kept = checked.records[0]!;
    const before = this.editing ? records.find((r) => r.id === id) : undefined;
    const next = before ? records.map((r) => (r.id === id ? kept : r)) : [...records, kept];
    const edit: QuestionEdit = before ? { kind: 'edit', before, after: kept } : { kind: 'add', record: kept };
    this.resetForm();
    this.emit({ ...this.collection, records: next }, pushEdit(liveHistory(this.edits, this.collection), edit));
  }

  private _onCancelEdit(): void {
    this.resetForm();
  }

  private _onDelete(r: QARecord): void {
    const index = this.collection.records.findIndex((x) => x.id === r.id);
    if (index < 0) return;
    if (this.editing === r.id) this.resetForm();
    const edits = pushEdit(liveHistory(this.edits, this.collection), { kind: 'delete', record: r, index });
    this.emit({ ...this.collection, records: this.collection.records.filter((x) => x.id !== r.id) }, edits);
  }

  /** Undoes the newest step that still applies, and shows its passage, so nothing comes back out of sight. */
  private _onUndo(): void {
    const u = undoEdit(this.edits, this.collection);
    if (!u) return;
    const passageId = describeEdit(u.undone).passageId;
    if (passageId !== this.passageId) {
      this.passageId = passageId;
      this.resetForm();
    }
    // the question on the form is the one undone: the form lets it go
    if (this.editing === (u.undone.kind === 'edit' ? u.undone.after.id : u.undone.record.id)) this.resetForm();
    this.emit({ ...this.collection, records: u.records }, u.history);
  }
}

declare global {
  interface HTMLElementTagNameMap {
    'passage-labeller': PassageLabeller;
  }
}
