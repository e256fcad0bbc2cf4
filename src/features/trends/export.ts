import type { SamplesResponse } from '../../../shared/contracts/plant-api.ts';

export interface ExportPen {
  name: string;
  data: SamplesResponse;
}

/** RFC 4180 field: quoted when it holds a comma, quote or line break. */
function field(v: unknown): string {
  const s = v === null || v === undefined ? '' : String(v);
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

/**
 * The points on screen as CSV, one row per pen and point (long form, so pens with different
 * timestamps or resolutions sit in one file without resampling). Only points inside the window.
 */
export function trendCsv(pens: ExportPen[], fromMs: number, toMs: number): string {
  const head = ['tag', 'unit', 'resolution', 'step_s', 'ts', 'value', 'min', 'max', 'count', 'quality', 'flags'];
  const lines = [head.join(',')];
  for (const p of pens) {
    for (const pt of p.data.points) {
      const t = Date.parse(pt.ts);
      if (t < fromMs || t >= toMs) continue;
      lines.push([p.name, p.data.unit, p.data.resolution, p.data.step_s, pt.ts, pt.value, pt.min, pt.max, pt.count, pt.quality, pt.flags?.join(';')].map(field).join(','));
    }
  }
  return lines.join('\r\n') + '\r\n';
}

export function download(name: string, blob: Blob): void {
  const url = URL.createObjectURL(blob);
  const a = document.createElement('a');
  a.href = url;
  a.download = name;
  document.body.appendChild(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10_000);
}

/**
 * The chart as a PNG: the SVG is serialized, drawn on a canvas at twice the size (for print)
 * on the panel grey, and encoded. Web fonts do not load inside an SVG image, so the monospace
 * fallback is set on the root.
 */
export async function svgToPng(svg: SVGSVGElement): Promise<Blob> {
  const w = svg.width.baseVal.value;
  const h = svg.height.baseVal.value;
  const clone = svg.cloneNode(true) as SVGSVGElement;
  clone.setAttribute('xmlns', 'http://www.w3.org/2000/svg');
  clone.setAttribute('font-family', 'ui-monospace, monospace');
  const text = new XMLSerializer().serializeToString(clone);
  const img = new Image();
  const url = URL.createObjectURL(new Blob([text], { type: 'image/svg+xml' }));
  try {
    await new Promise<void>((resolve, reject) => {
      img.onload = () => resolve();
      img.onerror = () => reject(new Error('the chart could not be drawn as an image'));
      img.src = url;
    });
    const scale = 2;
    const canvas = document.createElement('canvas');
    canvas.width = Math.round(w * scale);
    canvas.height = Math.round(h * scale);
    const g = canvas.getContext('2d');
    if (!g) throw new Error('no 2D canvas in this browser');
    g.fillStyle = '#eeeff0';
    g.fillRect(0, 0, canvas.width, canvas.height);
    g.scale(scale, scale);
    g.drawImage(img, 0, 0, w, h);
    return await new Promise<Blob>((resolve, reject) => canvas.toBlob((b) => (b ? resolve(b) : reject(new Error('PNG encoding failed'))), 'image/png'));
  } finally {
    URL.revokeObjectURL(url);
  }
}
