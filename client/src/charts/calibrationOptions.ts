// What every calibration plot shares: square axes from 0 to a little above the largest value, the dashed ideal line,
// the legend underneath. Used by CalibrationCurveChart and RecalibrateDialogCalibrationChart.
import type { ChartData, ChartOptions } from 'chart.js';
import { CHART_BASE, CHART_COLOURS } from '@/plugins/charts';

/** Ends the axes a little above the largest predicted or observed value (in steps of 0.05), so low risks are not squashed. */
export function calibrationAxisMax(values: number[]): number {
  const m = Math.max(0.05, ...values.filter(Number.isFinite));
  return Math.min(1, Math.ceil(m * 1.1 * 20) / 20);
}

/** A dashed diagonal from (0, 0) to (1, 1): the ideal line of a calibration plot, the chance line of an ROC plot. */
export function diagonalLine(label: string): ChartData<'scatter'>['datasets'][number] {
  return {
    label,
    data: [
      { x: 0, y: 0 },
      { x: 1, y: 1 },
    ],
    showLine: true,
    borderColor: CHART_COLOURS.reference,
    borderDash: [6, 4],
    pointRadius: 0,
    borderWidth: 1,
  };
}

/** The observed = predicted diagonal. */
export const idealLine = () => diagonalLine('Ideal (observed = predicted)');

export function calibrationOptions(axisMax: number, xTitle = 'Predicted risk'): ChartOptions<'scatter'> {
  return {
    ...CHART_BASE,
    scales: {
      x: { min: 0, max: axisMax, title: { display: true, text: xTitle } },
      y: { min: 0, max: axisMax, title: { display: true, text: 'Observed proportion' } },
    },
    plugins: { legend: { position: 'bottom' } },
  };
}
