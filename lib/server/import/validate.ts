/**
 * Row checks of an import: turns CSV records or JSON lines into staged rows, or into problems
 * that name the row and column. Nothing here touches the database; the project's facts
 * (feature count, class list, existing ids) are loaded beforehand.
 */
import { analyseHeader, describeColumn, isImageUrl, unneutraliseCell, type HeaderAnalysis } from '../../data-columns';
import { DATA_LIMITS, type ImportMode } from '../../domain-data';
import { encodeFeatures } from '../features';
import { checkFeatureJson, parseFeatureText } from './numbers';
import { DETAIL, FatalImportProblem, problemAt, type ImportProblem, type Where } from './problems';
import type { CsvRecord, JsonLine } from './readers';
import type { StagedRow } from './spool';

export interface ProjectFacts {
  /** Features per sample; 0 when the project has no samples yet and takes the file's count. */
  featureCount: number;
  maxClasses: number;
  /** Existing class names. */
  classNames: readonly string[];
  /** External ids already in the project. */
  existingIds: ReadonlySet<string>;
}

export interface ValidatorOptions {
  mode: ImportMode;
  featurePrefix?: string;
  maxProblems: number;
  /** Maps an image value that is not a URL to the stored reference of an uploaded file. */
  resolveImage?: (name: string) => string | null;
}

const CONTROL = /[\u0000-\u001f\u007f]/;
const PROVENANCE_FIELDS = new Set(['original_label', 'label_revision', 'added_revision', 'votes', 'decided_by']);
const JSON_NON_FINITE = /([[,:]\s*)(-?Infinity|NaN)(?=\s*[,\]}])/g;

type MetaValue = string | number | boolean | null;

export class RowValidator {
  readonly problems: ImportProblem[] = [];
  /** True when more problems were found than are kept. */
  truncated = false;
  /** Data rows read. */
  rows = 0;
  /** Valid rows whose id is new / already in the project. */
  newRows = 0;
  existingRows = 0;
  /** Labels not yet in the project's class list, in order of first appearance. */
  readonly newClasses: string[] = [];
  featureCount: number;

  private readonly classSet: Set<string>;
  private classLimitReported = false;
  private readonly seen = new Map<string, number>();
  private header: HeaderAnalysis | null = null;
  private headerNames: string[] = [];
  private features: Float32Array<ArrayBuffer>;
  /** Problems found so far, including those beyond the cap. */
  private found = 0;

  constructor(
    private readonly facts: ProjectFacts,
    private readonly options: ValidatorOptions,
  ) {
    this.featureCount = facts.featureCount;
    this.classSet = new Set(facts.classNames);
    this.features = new Float32Array(Math.max(1, facts.featureCount));
  }

  /** True once the problem cap is reached: stop reading. */
  get full(): boolean {
    return this.problems.length >= this.options.maxProblems;
  }

  get ok(): boolean {
    return this.problems.length === 0;
  }

  private add(problem: ImportProblem): void {
    this.found++;
    if (this.problems.length < this.options.maxProblems) this.problems.push(problem);
    else this.truncated = true;
  }

  // ───────────────────────── CSV ─────────────────────────

  /** Reads the header row; throws FatalImportProblem (first problem) when rows cannot be read. */
  csvHeader(record: CsvRecord): void {
    const names = record.cells.map((c) => c.trim());
    if (names.length < 2) {
      throw new FatalImportProblem(problemAt({ row: null, column: null, kind: 'csv' }, DETAIL.headerNoCommas));
    }
    const analysis = analyseHeader(names, { featurePrefix: this.options.featurePrefix });
    for (const p of analysis.problems) {
      const column = p.index === null ? null : describeColumn(p.index, names[p.index]);
      this.add(problemAt({ row: record.row, column, kind: 'csv' }, p.detail));
    }
    if (analysis.problems.length === 0 && analysis.featuresArrayIndex < 0) {
      const found = analysis.featureIndices.length;
      if (found > 0 && this.featureCount > 0 && found !== this.featureCount) {
        this.add(problemAt({ row: record.row, column: null, kind: 'csv' }, DETAIL.featureCountHeader(found, this.featureCount)));
      } else if (found > DATA_LIMITS.maxFeatures) {
        this.add(problemAt({ row: record.row, column: null, kind: 'csv' }, DETAIL.featureCountHeader(found, DATA_LIMITS.maxFeatures)));
      } else if (this.featureCount === 0) {
        this.adoptFeatureCount(found);
      }
    }
    if (!this.ok) throw new FatalImportProblem(this.problems[0]);
    this.header = analysis;
    this.headerNames = names;
  }

  private adoptFeatureCount(n: number): void {
    this.featureCount = n;
    if (this.features.length < n) this.features = new Float32Array(n);
  }

  private csvWhere(row: number, index: number): Where {
    return { row, column: describeColumn(index, this.headerNames[index]), kind: 'csv' };
  }

  /** Checks one data record; returns the staged row, or null when it has problems. */
  csvRow(record: CsvRecord): StagedRow | null {
    const h = this.header;
    if (h === null) throw new Error('csvRow before csvHeader');
    this.rows++;
    const { row, cells } = record;
    const width = this.headerNames.length;
    if (cells.length !== width) {
      if (cells.length < width) {
        this.add(problemAt(this.csvWhere(row, cells.length), DETAIL.raggedShort(cells.length, width)));
      } else {
        this.add(problemAt({ row, column: `${width + 1}`, kind: 'csv' }, DETAIL.raggedLong(cells.length, width)));
      }
      return null;
    }
    const before = this.found;
    const id = unneutraliseCell(cells[h.idIndex].trim());
    const label = unneutraliseCell(cells[h.labelIndex].trim());
    this.checkId(id, this.csvWhere(row, h.idIndex), row);
    this.checkLabel(label, this.csvWhere(row, h.labelIndex));

    let features: Uint8Array<ArrayBuffer> | null = null;
    if (h.featuresArrayIndex >= 0) {
      features = this.jsonFeatures(cells[h.featuresArrayIndex], row, h.featuresArrayIndex);
    } else {
      const fi = h.featureIndices;
      const out = this.features;
      let bad = false;
      for (let k = 0; k < fi.length; k++) {
        const v = parseFeatureText(cells[fi[k]]);
        if (typeof v === 'string') {
          this.add(problemAt(this.csvWhere(row, fi[k]), v));
          bad = true;
          break;
        }
        out[k] = v;
      }
      if (!bad) features = encodeFeatures(out.subarray(0, fi.length));
    }

    let text: string | null = null;
    if (h.textIndex >= 0) text = this.checkText(unneutraliseCell(cells[h.textIndex]), this.csvWhere(row, h.textIndex));
    let image: string | null = null;
    if (h.imageIndex >= 0) image = this.checkImage(unneutraliseCell(cells[h.imageIndex].trim()), this.csvWhere(row, h.imageIndex));
    let metadata: string | null = null;
    if (h.metaColumns.length > 0) {
      const meta: Record<string, MetaValue> = {};
      let count = 0;
      for (const m of h.metaColumns) {
        const value = unneutraliseCell(cells[m.index]);
        if (value === '') continue;
        if (this.checkMetaValue(value, this.csvWhere(row, m.index))) {
          meta[m.key] = value;
          count++;
        }
      }
      if (count > 0) metadata = JSON.stringify(meta);
    }
    return this.finishRow(before, row, id, label, text, image, metadata, features);
  }

  /** A CSV `features` cell: a JSON array of numbers. */
  private jsonFeatures(cell: string, row: number, index: number): Uint8Array<ArrayBuffer> | null {
    const name = this.headerNames[index];
    let parsed: unknown;
    try {
      parsed = JSON.parse(cell);
    } catch {
      parsed = undefined;
    }
    if (!Array.isArray(parsed)) {
      this.add(problemAt(this.csvWhere(row, index), DETAIL.featureArrayNotArray));
      return null;
    }
    return this.featureArray(parsed, (k) => ({ row, column: `${index + 1} (${name}[${k}])`, kind: 'csv' }), {
      row,
      column: describeColumn(index, name),
      kind: 'csv',
    });
  }

  private featureArray(values: unknown[], at: (k: number) => Where, whole: Where): Uint8Array<ArrayBuffer> | null {
    if (this.featureCount === 0) {
      if (values.length === 0 || values.length > DATA_LIMITS.maxFeatures) {
        this.add(problemAt(whole, DETAIL.featureCountRow(values.length, values.length === 0 ? 1 : DATA_LIMITS.maxFeatures)));
        return null;
      }
      this.adoptFeatureCount(values.length);
    }
    if (values.length !== this.featureCount) {
      this.add(problemAt(whole, DETAIL.featureCountRow(values.length, this.featureCount)));
      return null;
    }
    const out = this.features;
    for (let k = 0; k < values.length; k++) {
      const v = checkFeatureJson(values[k]);
      if (typeof v === 'string') {
        this.add(problemAt(at(k), v));
        return null;
      }
      out[k] = v;
    }
    return encodeFeatures(out.subarray(0, values.length));
  }

  // ───────────────────────── JSON Lines ─────────────────────────

  jsonRow(line: JsonLine): StagedRow | null {
    this.rows++;
    const row = line.row;
    const at = (column: string | null): Where => ({ row, column, kind: 'jsonl' });
    let value: unknown;
    try {
      value = JSON.parse(line.text);
    } catch {
      this.add(this.nonJsonProblem(line));
      return null;
    }
    if (value === null || typeof value !== 'object' || Array.isArray(value)) {
      this.add(problemAt(at(null), DETAIL.notObject));
      return null;
    }
    const before = this.found;
    const obj = value as Record<string, unknown>;
    const prefix = this.options.featurePrefix?.trim() ?? '';
    const meta: Record<string, MetaValue> = {};
    let metaCount = 0;
    const flat: unknown[] = [];
    let unknownReported = false;
    for (const key of Object.keys(obj)) {
      if (key === 'id' || key === 'label' || key === 'features' || key === 'text' || key === 'image') continue;
      if (key === 'meta') {
        const m = obj.meta;
        if (m === null || m === undefined) continue;
        if (typeof m !== 'object' || Array.isArray(m)) {
          this.add(problemAt(at('meta'), DETAIL.wrongType('an object of name: value pairs')));
          continue;
        }
        for (const [k, v] of Object.entries(m as Record<string, unknown>)) {
          if (this.jsonMeta(k, v, at(`meta.${k}`), meta)) metaCount++;
        }
        continue;
      }
      if (key.startsWith('meta.')) {
        if (this.jsonMeta(key.slice(5), obj[key], at(key), meta)) metaCount++;
        continue;
      }
      if (PROVENANCE_FIELDS.has(key)) continue;
      if (prefix !== '' && key.startsWith(prefix)) {
        flat.push(obj[key]);
        continue;
      }
      if (!unknownReported) {
        this.add(problemAt(at(key), DETAIL.unknownField(key)));
        unknownReported = true;
      }
    }
    if (metaCount > DATA_LIMITS.metaFields) {
      this.add(problemAt(at('meta'), `has ${metaCount} fields; at most ${DATA_LIMITS.metaFields} are allowed.`));
    }

    const id = this.jsonText(obj.id, 'id', at('id'));
    const label = this.jsonText(obj.label, 'label', at('label'));
    if (id !== null) this.checkId(id, at('id'), row);
    if (label !== null) this.checkLabel(label, at('label'));

    let features: Uint8Array<ArrayBuffer> | null = null;
    if ('features' in obj) {
      if (!Array.isArray(obj.features)) this.add(problemAt(at('features'), DETAIL.featureArrayNotArray));
      else features = this.featureArray(obj.features, (k) => at(`features[${k}]`), at('features'));
    } else if (prefix !== '' && flat.length > 0) {
      const keys = Object.keys(obj).filter((k) => k.startsWith(prefix));
      features = this.featureArray(flat, (k) => at(keys[k]), at(null));
    } else {
      this.add(problemAt(at(null), DETAIL.noFeatures));
    }

    let text: string | null = null;
    if (obj.text !== undefined && obj.text !== null) {
      if (typeof obj.text !== 'string') this.add(problemAt(at('text'), DETAIL.wrongType('a string or null')));
      else text = this.checkText(obj.text, at('text'));
    }
    let image: string | null = null;
    if (obj.image !== undefined && obj.image !== null) {
      if (typeof obj.image !== 'string') this.add(problemAt(at('image'), DETAIL.wrongType('a string or null')));
      else image = this.checkImage(obj.image.trim(), at('image'));
    }
    const metadata = metaCount > 0 ? JSON.stringify(meta) : null;
    if (id === null || label === null) return null;
    return this.finishRow(before, row, id, label, text, image, metadata, features);
  }

  private nonJsonProblem(line: JsonLine): ImportProblem {
    const at = (column: string | null): Where => ({ row: line.row, column, kind: 'jsonl' });
    JSON_NON_FINITE.lastIndex = 0;
    const token = JSON_NON_FINITE.exec(line.text);
    if (token) {
      const replaced = line.text.replace(JSON_NON_FINITE, '$1null');
      try {
        const o = JSON.parse(replaced) as unknown;
        if (o && typeof o === 'object' && !Array.isArray(o)) {
          const f = (o as Record<string, unknown>).features;
          const k = Array.isArray(f) ? f.indexOf(null) : -1;
          return problemAt(at(k >= 0 ? `features[${k}]` : null), DETAIL.jsonNonFinite(token[2]));
        }
      } catch {
        // fall through: not JSON for another reason
      }
    }
    return problemAt(at(null), DETAIL.notJson);
  }

  private jsonText(v: unknown, field: 'id' | 'label', where: Where): string | null {
    if (v === undefined) {
      this.add(problemAt({ ...where, column: null }, DETAIL.missingField(field)));
      return null;
    }
    if (typeof v === 'string') return v.trim();
    if (typeof v === 'number' && Number.isFinite(v)) return String(v);
    this.add(problemAt(where, DETAIL.wrongType('a string')));
    return null;
  }

  private jsonMeta(key: string, v: unknown, where: Where, into: Record<string, MetaValue>): boolean {
    if (key.trim() === '' || key.length > DATA_LIMITS.metaKey) {
      this.add(problemAt(where, `the metadata name must be 1 to ${DATA_LIMITS.metaKey} characters.`));
      return false;
    }
    if (v === null || typeof v === 'boolean' || (typeof v === 'number' && Number.isFinite(v))) {
      into[key] = v;
      return true;
    }
    if (typeof v === 'string') {
      if (!this.checkMetaValue(v, where)) return false;
      into[key] = v;
      return true;
    }
    this.add(problemAt(where, DETAIL.metaValue));
    return false;
  }

  // ───────────────────────── shared checks ─────────────────────────

  private checkId(id: string, where: Where, row: number): void {
    if (id === '') return this.add(problemAt(where, DETAIL.emptyId));
    if (id.length > DATA_LIMITS.externalId) return this.add(problemAt(where, DETAIL.tooLong('id', DATA_LIMITS.externalId)));
    if (CONTROL.test(id)) return this.add(problemAt(where, DETAIL.controlChars('id')));
    const first = this.seen.get(id);
    if (first !== undefined) return this.add(problemAt(where, DETAIL.duplicateId(id, first)));
    this.seen.set(id, row);
    const exists = this.facts.existingIds.has(id);
    if (exists && this.options.mode === 'insert') return this.add(problemAt(where, DETAIL.idExists(id)));
  }

  private checkLabel(label: string, where: Where): void {
    if (label === '') return this.add(problemAt(where, DETAIL.emptyLabel));
    if (label.length > DATA_LIMITS.label) return this.add(problemAt(where, DETAIL.tooLong('label', DATA_LIMITS.label)));
    if (CONTROL.test(label)) return this.add(problemAt(where, DETAIL.controlChars('label')));
    if (!this.classSet.has(label)) {
      this.classSet.add(label);
      this.newClasses.push(label);
      if (this.classSet.size > this.facts.maxClasses && !this.classLimitReported) {
        this.classLimitReported = true;
        this.add(problemAt(where, DETAIL.tooManyClasses(label, this.classSet.size, this.facts.maxClasses)));
      }
    }
  }

  private checkText(text: string, where: Where): string | null {
    if (text === '') return null;
    if (text.length > DATA_LIMITS.text) {
      this.add(problemAt(where, DETAIL.tooLong('text', DATA_LIMITS.text)));
      return null;
    }
    return text;
  }

  private checkImage(value: string, where: Where): string | null {
    if (value === '') return null;
    if (value.length > DATA_LIMITS.image) {
      this.add(problemAt(where, DETAIL.tooLong('image', DATA_LIMITS.image)));
      return null;
    }
    if (isImageUrl(value)) return value;
    const ref = this.options.resolveImage?.(value) ?? null;
    if (ref === null) this.add(problemAt(where, DETAIL.badImage(value)));
    return ref;
  }

  private checkMetaValue(value: string, where: Where): boolean {
    if (value.length > DATA_LIMITS.metaValue) {
      this.add(problemAt(where, DETAIL.tooLong('the value', DATA_LIMITS.metaValue)));
      return false;
    }
    return true;
  }

  private finishRow(
    problemsBefore: number,
    row: number,
    id: string,
    label: string,
    text: string | null,
    image: string | null,
    metadata: string | null,
    features: Uint8Array<ArrayBuffer> | null,
  ): StagedRow | null {
    if (this.found !== problemsBefore || features === null) return null;
    if (this.facts.existingIds.has(id)) this.existingRows++;
    else this.newRows++;
    return { row, id, label, text, image, metadata, features };
  }

  /** Checks that belong to the file as a whole; call after the last row. */
  finish(kind: 'csv' | 'jsonl'): void {
    if (this.rows === 0 && this.ok) this.add(problemAt({ row: null, column: null, kind }, DETAIL.noRows));
  }
}
