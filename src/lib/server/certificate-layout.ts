/**
 * Layout helpers for the calibration certificate (certificate-pdf.ts): number formatting, colours, page
 * geometry, the text/table Writer over a pdfkit document, the residual chart and the accuracy-map block.
 * Pure drawing: no database, no clock.
 */
import { createRequire } from 'node:module';
import type { AccuracyMap, AccuracyPlane } from '../engine/accuracy-map';

/** One pose's residual before and after calibration, as the chart draws it. */
export interface ResidualPoint {
  label: string;
  role: string;
  before: number;
  after: number;
}

// ---- formatting (shared with the tests that read the text back) -------------------------------------------

export const fmtMm = (x: number | null | undefined) => (x === null || x === undefined || !Number.isFinite(x) ? '–' : x.toFixed(3));
export const fmtValue = (x: number, unit: 'mm' | 'deg') => x.toFixed(unit === 'mm' ? 3 : 4);
export const fmtSe = (x: number | null) => (x === null || !Number.isFinite(x) ? '–' : Number(x.toPrecision(2)).toString());
export const fmtWhen = (iso: string) => `${iso.slice(0, 10)} ${iso.slice(11, 16)} UTC`;
export const GROUP_WORDS: Record<string, string> = {
  lengths: 'lengths',
  twists: 'twists',
  offsets: 'zero offsets',
  beta: 'twists about y (beta)',
  base: 'base frame',
  tool: 'tool point',
};

/** The sentence stating the four-eyes outcome (also checked by tests). */
// ---- drawing -------------------------------------------------------------------------------------------

export const INK = '#1c2330', SOFT = '#5b6577', GREY = '#8a94a6', TEAL = '#0f6e6e', AMBER = '#b7791f', LINE = '#d5dae3';
export const PAGE = { w: 595.28, h: 841.89, margin: 50 };

/** The font files, resolved when a certificate is drawn (not at import, so a missing package names itself there). */
export function fontFiles() {
  const require = createRequire(import.meta.url);
  return {
    regular: require.resolve('source-sans/TTF/SourceSans3-Regular.ttf'),
    semibold: require.resolve('source-sans/TTF/SourceSans3-Semibold.ttf'),
  };
}

export type Doc = PDFKit.PDFDocument;

/** Linear blend of two #rrggbb colours. */
function blend(a: string, b: string, t: number): string {
  const pa = [1, 3, 5].map((i) => parseInt(a.slice(i, i + 2), 16));
  const pb = [1, 3, 5].map((i) => parseInt(b.slice(i, i + 2), 16));
  return '#' + pa.map((v, i) => Math.round(v + (pb[i]! - v) * Math.min(1, Math.max(0, t))).toString(16).padStart(2, '0')).join('');
}
/** Sequential scale for the map: pale (no change) → amber (half) → deep red-brown (scale maximum). */
export const mapColour = (t: number) => (t < 0.5 ? blend('#eef6f6', '#e3b04b', t * 2) : blend('#e3b04b', '#7a2e0e', (t - 0.5) * 2));

export class Writer {
  constructor(readonly doc: Doc) {}
  get bottom() {
    return PAGE.h - PAGE.margin - 20;
  }
  ensure(height: number) {
    if (this.doc.y + height > this.bottom) this.doc.addPage();
  }
  heading(text: string) {
    this.ensure(60);
    this.doc.moveDown(0.6).font('semibold').fontSize(13).fillColor(TEAL).text(text, PAGE.margin);
    this.doc.moveTo(PAGE.margin, this.doc.y + 1).lineTo(PAGE.w - PAGE.margin, this.doc.y + 1).lineWidth(0.5).strokeColor(LINE).stroke();
    this.doc.moveDown(0.3).font('regular').fontSize(9.5).fillColor(INK);
  }
  para(text: string, opts: PDFKit.Mixins.TextOptions = {}) {
    this.ensure(24);
    this.doc.font('regular').fontSize(9.5).fillColor(INK).text(text, PAGE.margin, this.doc.y, { width: PAGE.w - 2 * PAGE.margin, ...opts });
  }
  /** label: value rows in two columns of text. */
  pairs(rows: [string, string][], labelWidth = 150) {
    for (const [k, v] of rows) {
      const width = PAGE.w - 2 * PAGE.margin - labelWidth;
      const h = Math.max(this.doc.font('regular').fontSize(9.5).heightOfString(v, { width }), 12);
      this.ensure(h + 2);
      const y = this.doc.y;
      this.doc.font('semibold').fontSize(9.5).fillColor(SOFT).text(k, PAGE.margin, y, { width: labelWidth - 8 });
      this.doc.font('regular').fillColor(INK).text(v, PAGE.margin + labelWidth, y, { width });
      this.doc.y = Math.max(this.doc.y, y + h) + 2;
    }
  }
  /** A table; numeric columns right-aligned, text wraps within its column; the header repeats on a new page. */
  table(columns: { title: string; width: number; align?: 'left' | 'right' }[], rows: string[][], size = 8.5) {
    const lineH = size + 5;
    const header = () => {
      let x = PAGE.margin;
      const y = this.doc.y;
      this.doc.font('semibold').fontSize(size).fillColor(SOFT);
      for (const c of columns) {
        this.doc.text(c.title, x + 2, y, { width: c.width - 4, align: c.align ?? 'left', lineBreak: false });
        x += c.width;
      }
      this.doc.moveTo(PAGE.margin, y + lineH - 1).lineTo(x, y + lineH - 1).lineWidth(0.5).strokeColor(LINE).stroke();
      this.doc.y = y + lineH;
    };
    this.ensure(lineH * 3);
    header();
    for (const r of rows) {
      this.doc.font('regular').fontSize(size);
      const h = Math.max(lineH, ...r.map((cell, i) => this.doc.heightOfString(cell, { width: columns[i]!.width - 4 }) + 4));
      if (this.doc.y + h > this.bottom) {
        this.doc.addPage();
        header();
      }
      let x = PAGE.margin;
      const y = this.doc.y;
      this.doc.font('regular').fontSize(size).fillColor(INK);
      r.forEach((cell, i) => {
        const c = columns[i]!;
        this.doc.text(cell, x + 2, y, { width: c.width - 4, align: c.align ?? 'left' });
        x += c.width;
      });
      this.doc.y = y + h;
    }
    this.doc.x = PAGE.margin;
    this.doc.moveDown(0.3);
  }
}

/** Round "nice" tick values on a log10 axis between lo and hi (mm). */
function logTicks(lo: number, hi: number): number[] {
  const out: number[] = [];
  for (let e = Math.floor(Math.log10(lo)); e <= Math.ceil(Math.log10(hi)); e++) out.push(10 ** e);
  return out;
}

export function residualChart(w: Writer, residuals: ResidualPoint[]) {
  const doc = w.doc;
  const height = 170, left = PAGE.margin + 46, right = PAGE.w - PAGE.margin - 8;
  w.ensure(height + 40);
  const top = doc.y + 4, bottom = top + height - 30;
  const vals = residuals.flatMap((r) => [r.before, r.after]).filter((v) => v > 0 && Number.isFinite(v));
  if (!vals.length) {
    w.para('No per-pose residuals were recorded for this fit.');
    return;
  }
  const ticks = logTicks(Math.max(Math.min(...vals), 1e-4), Math.max(...vals));
  const lo = Math.log10(ticks[0]!), hi = Math.log10(ticks.at(-1)!);
  const y = (v: number) => bottom - ((Math.log10(Math.max(v, ticks[0]!)) - lo) / (hi - lo || 1)) * (bottom - top);
  const x = (i: number) => left + ((i + 0.5) / residuals.length) * (right - left);
  doc.lineWidth(0.4).strokeColor(LINE);
  doc.font('regular').fontSize(7).fillColor(SOFT);
  for (const t of ticks) {
    doc.moveTo(left, y(t)).lineTo(right, y(t)).stroke();
    doc.text(t >= 1 ? t.toFixed(0) : t.toString(), PAGE.margin, y(t) - 3.5, { width: 42, align: 'right', lineBreak: false });
  }
  doc.rect(left, top, right - left, bottom - top).stroke();
  residuals.forEach((r, i) => {
    doc.circle(x(i), y(r.before), 1.6).fillColor(GREY).fill();
    if (r.role === 'holdout') doc.rect(x(i) - 1.8, y(r.after) - 1.8, 3.6, 3.6).fillColor(AMBER).fill();
    else if (r.role === 'fit') doc.circle(x(i), y(r.after), 1.6).fillColor(TEAL).fill();
  });
  doc.save().rotate(-90, { origin: [PAGE.margin - 6, (top + bottom) / 2] });
  doc.font('regular').fontSize(7.5).fillColor(SOFT).text('position error (mm, log scale)', PAGE.margin - 66, (top + bottom) / 2 - 4, { width: 120, align: 'center', lineBreak: false });
  doc.restore();
  doc.font('regular').fontSize(7.5).fillColor(SOFT).text(`pose, in session order (${residuals.length} poses)`, left, bottom + 4, { width: right - left, align: 'center', lineBreak: false });
  // Legend in words, with the marker shapes (colour is not the only carrier).
  const ly = bottom + 16;
  doc.circle(left + 4, ly + 3, 2).fillColor(GREY).fill();
  doc.fillColor(INK).text('before: nominal geometry', left + 10, ly, { lineBreak: false });
  doc.circle(left + 134, ly + 3, 2).fillColor(TEAL).fill();
  doc.fillColor(INK).text('after: calibrated, fitted poses', left + 140, ly, { lineBreak: false });
  doc.rect(left + 282, ly + 1, 4, 4).fillColor(AMBER).fill();
  doc.fillColor(INK).text('after: calibrated, held-out poses', left + 290, ly, { lineBreak: false });
  doc.x = PAGE.margin;
  doc.y = ly + 14;
}

const AXIS_TITLE = { xy: ['x', 'y', 'z'], xz: ['x', 'z', 'y'], yz: ['y', 'z', 'x'] } as const;

function mapPanel(doc: Doc, p: AccuracyPlane, scaleMax: number, x0: number, y0: number, size: number) {
  const n = p.cells.length;
  const cell = size / n;
  for (let iv = 0; iv < n; iv++) {
    for (let iu = 0; iu < n; iu++) {
      const c = p.cells[iv]![iu];
      if (c === null || c === undefined) continue;
      // v grows upwards on the page.
      doc.rect(x0 + iu * cell, y0 + size - (iv + 1) * cell, cell + 0.2, cell + 0.2).fillColor(mapColour(scaleMax > 0 ? c / scaleMax : 0)).fill();
    }
  }
  doc.rect(x0, y0, size, size).lineWidth(0.5).strokeColor(GREY).stroke();
  const [u, v, f] = AXIS_TITLE[p.axes];
  doc.font('regular').fontSize(7).fillColor(SOFT);
  doc.text(`${u} (mm): ${p.u[0]!.toFixed(0)} … ${p.u.at(-1)!.toFixed(0)}`, x0, y0 + size + 3, { width: size, align: 'center', lineBreak: false });
  doc.text(`${v} (mm): ${p.v[0]!.toFixed(0)} … ${p.v.at(-1)!.toFixed(0)}, upwards`, x0, y0 + size + 12, { width: size, align: 'center', lineBreak: false });
  doc.font('semibold').fontSize(8).fillColor(INK).text(`${u}–${v} plane at ${f} = ${p.fixed.at.toFixed(0)} ± ${p.fixed.halfThickness.toFixed(0)} mm`, x0, y0 - 12, { width: size, align: 'center', lineBreak: false });
}

/** The accuracy-map block: three planes, the colour scale with its numbers, and the method in words. */
export function drawAccuracyMap(w: Writer, m: AccuracyMap) {
  const doc = w.doc;
  const size = 148, gap = (PAGE.w - 2 * PAGE.margin - 3 * size) / 2;
  w.ensure(size + 90);
  const y0 = doc.y + 14;
  m.planes.forEach((p, i) => mapPanel(doc, p, m.scaleMaxMm, PAGE.margin + i * (size + gap), y0, size));
  const sy = y0 + size + 28;
  const sw = 220;
  for (let k = 0; k < 60; k++) doc.rect(PAGE.margin + (k * sw) / 60, sy, sw / 60 + 0.3, 8).fillColor(mapColour(k / 59)).fill();
  doc.rect(PAGE.margin, sy, sw, 8).lineWidth(0.4).strokeColor(GREY).stroke();
  doc.font('regular').fontSize(7.5).fillColor(INK);
  doc.text('0 mm', PAGE.margin, sy + 10, { lineBreak: false });
  doc.text(`${fmtMm(m.scaleMaxMm / 2)} mm`, PAGE.margin + sw / 2 - 20, sy + 10, { width: 40, align: 'center', lineBreak: false });
  doc.text(`${fmtMm(m.scaleMaxMm)} mm`, PAGE.margin + sw - 40, sy + 10, { width: 40, align: 'right', lineBreak: false });
  doc.text('Colour scale: |calibrated − nominal| predicted position, mean per cell; blank = not reached.', PAGE.margin + sw + 12, sy - 1, { width: PAGE.w - 2 * PAGE.margin - sw - 12 });
  doc.x = PAGE.margin;
  doc.y = Math.max(doc.y, sy + 22);
  w.para(
    `Scale 0 to ${fmtMm(m.scaleMaxMm)} mm. Over all ${m.samples} sampled configurations: mean ${fmtMm(m.meanMm)} mm, largest ${fmtMm(m.maxMm)} mm. ` +
      `Joint values drawn uniformly within the joint limits (seed ${m.seed}); for each, the target point predicted with the nominal and with the calibrated geometry, ` +
      `each in its own robot base frame (the tracker placement is left out), binned by the nominal point into ${m.cellsPerSide} × ${m.cellsPerSide} cells on three slabs through the median reached point.`,
    { lineGap: 0.5 },
  );
}
