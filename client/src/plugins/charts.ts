// chart.js pieces the run charts use, registered once, and a small plugin that draws vertical CI bars.
import {
  BarElement,
  CategoryScale,
  Chart,
  Filler,
  Legend,
  LinearScale,
  LineElement,
  PointElement,
  Tooltip,
  type Plugin,
} from 'chart.js';

Chart.register(LinearScale, CategoryScale, PointElement, LineElement, BarElement, Tooltip, Legend, Filler);

/** A point with a 95% interval: the plugin draws a bar from yMin to yMax with small caps. */
export interface IntervalPoint {
  x: number;
  y: number;
  yMin: number;
  yMax: number;
}

/** Draws the intervals of every dataset whose `errorBars` option is true (chart.js has no built-in error bars). */
export const errorBarsPlugin: Plugin = {
  id: 'plumblineErrorBars',
  afterDatasetsDraw(chart) {
    const { ctx } = chart;
    const y = chart.scales.y;
    const x = chart.scales.x;
    chart.data.datasets.forEach((ds, i) => {
      if (!(ds as { errorBars?: boolean }).errorBars || !chart.isDatasetVisible(i)) return;
      ctx.save();
      ctx.strokeStyle = (ds.borderColor as string) ?? '#333';
      ctx.lineWidth = 1.5;
      for (const raw of ds.data as unknown as IntervalPoint[]) {
        if (!raw || !Number.isFinite(raw.yMin) || !Number.isFinite(raw.yMax)) continue;
        const px = x.getPixelForValue(raw.x);
        const top = y.getPixelForValue(raw.yMax);
        const bottom = y.getPixelForValue(raw.yMin);
        ctx.beginPath();
        ctx.moveTo(px, top);
        ctx.lineTo(px, bottom);
        ctx.moveTo(px - 4, top);
        ctx.lineTo(px + 4, top);
        ctx.moveTo(px - 4, bottom);
        ctx.lineTo(px + 4, bottom);
        ctx.stroke();
      }
      ctx.restore();
    });
  },
};

/** The chart as a PNG data URL, from a vue-chartjs component ref. */
export function chartImage(component: unknown): string | undefined {
  const chart = (component as { chart?: { toBase64Image(type?: string): string } } | null)?.chart;
  return chart?.toBase64Image('image/png');
}

/** What every chart shares: it fills its panel and is drawn at once (no animation to wait for on screen, in print or in tests). */
export const CHART_BASE = { responsive: true, maintainAspectRatio: false, animation: false } as const;

export const CHART_COLOURS = {
  model: '#1f5f8b',
  loess: '#b5542d',
  reference: '#8a8a8a',
  treatAll: '#6b8e23',
  events: '#b5542d',
  nonEvents: '#1f5f8b',
};

/** One colour per group when several groups share a plot (Okabe & Ito's colour-blind-safe set, yellow left out). */
export const GROUP_COLOURS = ['#0072b2', '#d55e00', '#009e73', '#cc79a7', '#e69f00', '#56b4e9', '#000000'];

/** A colour made see-through, for bands drawn behind a line ('#1f5f8b' → 'rgba(31, 95, 139, 0.2)'). */
export function translucent(hex: string, alpha = 0.2): string {
  const n = Number.parseInt(hex.slice(1), 16);
  return `rgba(${(n >> 16) & 255}, ${(n >> 8) & 255}, ${n & 255}, ${alpha})`;
}

// Chart and table downloads go through the one CSV writer (quoting and formula neutralisation), as the server's do.
export { toCsv, type CsvCell } from '@shared/csv';
