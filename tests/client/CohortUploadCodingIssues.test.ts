// The coding check's choice: each unnamed label is read as the formula's level or as none of them, or the steward goes back.
import { flushPromises, mount } from '@vue/test-utils';
import { afterEach, describe, expect, it } from 'vitest';
import { createVuetify } from 'vuetify';
import type { CodingIssue } from '@shared/cohorts';
import CohortUploadCodingIssues from '@/components/CohortUploadCodingIssues.vue';

const issue = (unnamed: string[]): CodingIssue => ({
  predictor: 'emergency_admission',
  fileColumn: 'emerg',
  levels: ['yes'],
  absent: ['yes'],
  unnamed: unnamed.map((value, k) => ({ value, count: 10 + k })),
  message: 'emergency_admission: the formula\'s level "yes" never occurs; the column holds "Y" (10), "N" (11).',
});

let wrapper: ReturnType<typeof mount> | null = null;
afterEach(() => {
  wrapper?.unmount();
  wrapper = null;
});

describe('CohortUploadCodingIssues', () => {
  it('states the mismatch, offers the level or none for each label, and sends the reading', async () => {
    wrapper = mount(CohortUploadCodingIssues, {
      props: { issues: [issue(['Y', 'N'])] },
      global: { plugins: [createVuetify()] },
    });
    expect(wrapper.text()).toContain('"yes" never occurs');
    expect(wrapper.text()).toContain('No label is read as "yes" yet');
    const vm = wrapper.findComponent({ name: 'VSelect' });
    expect(wrapper.findAllComponents({ name: 'VSelect' })).toHaveLength(2);
    expect((vm.props('items') as { value: string }[]).map((i) => i.value)).toEqual(['yes', '']);
    vm.vm.$emit('update:modelValue', 'yes');
    await flushPromises();
    expect(wrapper.text()).not.toContain('No label is read as');
    await wrapper.find('[data-test="apply-labels"]').trigger('click');
    expect(wrapper.emitted('apply')![0]).toEqual([{ emergency_admission: { Y: 'yes', N: '' } }]);
    await wrapper.find('[data-test="coding-back"]').trigger('click');
    expect(wrapper.emitted('back')).toHaveLength(1);
  });

  it('offers a label that differs only by case as the level itself', async () => {
    wrapper = mount(CohortUploadCodingIssues, {
      props: { issues: [{ ...issue(['Yes', 'no', 'unknown']), absent: [] }] },
      global: { plugins: [createVuetify()] },
    });
    await wrapper.find('[data-test="apply-labels"]').trigger('click');
    expect(wrapper.emitted('apply')![0]).toEqual([{ emergency_admission: { Yes: 'yes', no: '', unknown: '' } }]);
  });
});
