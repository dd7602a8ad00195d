// The mapping step's subgroup choice: chosen columns become subgroups with names the mapping schema accepts, a
// subgroup keeps its name, and columns mapped elsewhere are not offered.
import { mount } from '@vue/test-utils';
import { describe, expect, it } from 'vitest';
import { createVuetify } from 'vuetify';
import { columnMapping } from '@shared/cohorts';
import CohortUploadSubgroupPicker from '@/components/CohortUploadSubgroupPicker.vue';

const vuetify = createVuetify();

describe('CohortUploadSubgroupPicker', () => {
  it('names new subgroups after their column, keeps existing names, and offers only free columns', async () => {
    const w = mount(CohortUploadSubgroupPicker, {
      props: {
        modelValue: { sex: 'gender' },
        headers: ['age', 'gender', 'ward', '2nd site (main)', 'outcome'],
        taken: ['age', 'outcome'],
      },
      global: { plugins: [vuetify] },
    });
    const picker = w.findComponent({ name: 'VAutocomplete' });
    expect(picker.props('items')).toEqual(['gender', 'ward', '2nd site (main)']);
    picker.vm.$emit('update:modelValue', ['gender', 'ward', '2nd site (main)']);
    await w.vm.$nextTick();
    const emitted = w.emitted('update:modelValue')!.at(-1)![0] as Record<string, string>;
    expect(emitted).toEqual({ sex: 'gender', ward: 'ward', 'column 2nd site main': '2nd site (main)' });
    // The mapping schema accepts every name given.
    const parsed = columnMapping.safeParse({ predictors: {}, outcome: { column: 'outcome' }, subgroups: emitted });
    expect(parsed.success).toBe(true);
  });
});
