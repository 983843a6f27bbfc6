// defines: QARecord, Answer — the one record type every stage of Spanwright reads.

/** One gold answer: its text and where it starts in the context (UTF-16 code units). */
export interface Answer {
  text: string;
  /** character offset into `context`, as JavaScript string indices count */
  start: number;
}

/** One labelled question over one passage. */
export interface QARecord {
  /** unique within a dataset */
  id: string;
  /** the passage this question is asked of; splits group by this */
  passageId: string;
  context: string;
  question: string;
  /** empty when `unanswerable` */
  answers: Answer[];
  /** SQuAD 2.0 `is_impossible`: the passage does not answer the question */
  unanswerable: boolean;
}
