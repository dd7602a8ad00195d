// The version form checks with the shared schema before it sends, and loads a --model file.
import { mount } from '@vue/test-utils';
import { describe, expect, it } from 'vitest';
import { createVuetify } from 'vuetify';
import ScoreVersionForm from '@/components/ScoreVersionForm.vue';

const vuetify = createVuetify();

const startFrom = {
  id: 'v1',
  scoreId: 's',
  version: 1,
  mode: 'formula' as const,
  probabilityColumn: null,
  changeNote: '',
  derivedFromRunId: null,
  derivation: null,
  locked: true,
  clinicalStatus: 'not approved' as const,
  approvedRunId: null,
  createdBy: null,
  createdByName: null,
  createdAt: '2026-01-01T00:00:00Z',
  model: {
    intercept: -3.6,
    predictors: [{ column: 'emergency_admission', coefficient: 0.45, transform: 'indicator' as const, level: 'yes' }],
  },
};

const mountForm = (props: Record<string, unknown>) =>
  mount(ScoreVersionForm, { props: { scoreName: 'Test', ...props }, global: { plugins: [vuetify] } });

describe('ScoreVersionForm', () => {
  it('starts from an earlier version and sends it once the change note is written', async () => {
    const w = mountForm({ nextVersion: 2, startFrom });
    expect(w.findAll('[data-test="predictor-row"]')).toHaveLength(1);
    await w.find('form').trigger('submit');
    expect(w.emitted('submit')).toBeUndefined();
    expect(w.text()).toMatch(/change note is required for version 2/);
    await w.find('[data-test="change-note"] textarea').setValue('coefficient corrected');
    await w.find('form').trigger('submit');
    expect(w.emitted('submit')![0][0]).toEqual({
      mode: 'formula',
      model: startFrom.model,
      changeNote: 'coefficient corrected',
    });
  });

  it('refuses an indicator without a level and a blank intercept, naming the row', async () => {
    const w = mountForm({
      nextVersion: 1,
      startFrom: {
        ...startFrom,
        model: {
          intercept: 0,
          predictors: [{ column: 'ward', coefficient: 1, transform: 'indicator' as const, level: '' }],
        },
      },
    });
    await w.find('[data-test="intercept"] input').setValue('');
    const rowInputs = w.find('[data-test="predictor-row"]').findAll('input');
    expect(rowInputs.length).toBeGreaterThan(2);
    await w.find('form').trigger('submit');
    expect(w.emitted('submit')).toBeUndefined();
    expect(w.text()).toMatch(/intercept: /);
    // Whole-formula rules run once every field has the right type.
    await w.find('[data-test="intercept"] input').setValue('-1.2');
    await w.find('form').trigger('submit');
    expect(w.emitted('submit')).toBeUndefined();
    expect(w.text()).not.toMatch(/intercept: /);
    expect(w.text()).toMatch(/Predictor 1 \(level\): ward: an indicator needs a level that is not blank/);
  });
});
