// What every ROC plot shares: the curve drawn as a line, the dashed chance diagonal, unit axes, the legend underneath.
// Used by RocCurveChart (one run) and RunMissingDataCurves (the pooled curve).
import type { ChartData, ChartOptions } from 'chart.js';
import { CHART_BASE, CHART_COLOURS } from '@/plugins/charts';
import { diagonalLine } from './calibrationOptions';

type Dataset = ChartData<'scatter'>['datasets'][number];

/** One ROC curve from its false- and true-positive rates. */
export function rocLine(label: string, fpr: readonly number[], tpr: readonly number[]): Dataset {
  return {
    label,
    data: fpr.map((x, i) => ({ x, y: tpr[i] })),
    showLine: true,
    borderColor: CHART_COLOURS.model,
    backgroundColor: CHART_COLOURS.model,
    pointRadius: 0,
    borderWidth: 2,
  };
}

/** The diagonal of a score that ranks no better than chance. */
export const chanceLine = () => diagonalLine('Chance');

export const rocOptions: ChartOptions<'scatter'> = {
  ...CHART_BASE,
  scales: {
    x: { min: 0, max: 1, title: { display: true, text: '1 − specificity (false-positive rate)' } },
    y: { min: 0, max: 1, title: { display: true, text: 'Sensitivity (true-positive rate)' } },
  },
  plugins: { legend: { position: 'bottom' } },
};
