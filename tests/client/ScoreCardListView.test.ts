// The clinician's score cards: the clinical-use caution is read once per card, not once by the page and again by the card.
import { flushPromises, mount } from '@vue/test-utils';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { createVuetify } from 'vuetify';
import type { ScoreCardView } from '@shared/governance';
import ScoreCardListView from '@/views/ScoreCardListView.vue';

const card = (id: string): ScoreCardView => ({
  scoreVersionId: id,
  scoreName: `Invented score ${id}`,
  version: 2,
  predicts: 'Unplanned readmission',
  horizon: '30 days',
  forWhom: 'Adults on medical wards',
  citation: 'Invented citation',
  inputs: [{ name: 'age', how: 'years' }],
  caution: 'Invented score; says nothing about children.',
  validation: null,
  approval: null,
});

const cards = vi.fn(async () => [card('sv-1')]);
vi.mock('@/api/scorecards', () => ({ listScoreCards: () => cards() }));

let wrapper: ReturnType<typeof mount> | null = null;
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
});

const cautions = () => wrapper!.findAll('[aria-label="Clinical-use caution"]').length;

describe('ScoreCardListView', () => {
  it('shows the clinical-use caution once for one card', async () => {
    wrapper = mount(ScoreCardListView, { global: { plugins: [createVuetify()] } });
    await flushPromises();
    expect(wrapper.findAll('.score-card')).toHaveLength(1);
    expect(cautions()).toBe(1);
    // The score's own caution text is still there, once.
    expect(wrapper.text().split('says nothing about children').length - 1).toBe(1);
  });

  it('every card carries the caution (a card may be read or printed alone)', async () => {
    cards.mockResolvedValueOnce([card('sv-1'), card('sv-2')]);
    wrapper = mount(ScoreCardListView, { global: { plugins: [createVuetify()] } });
    await flushPromises();
    expect(wrapper.findAll('.score-card')).toHaveLength(2);
    expect(wrapper.findAll('.score-card [aria-label="Clinical-use caution"]')).toHaveLength(2);
    expect(cautions()).toBe(2);
  });
});
