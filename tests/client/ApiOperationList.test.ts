// The API reference page lists each operation of the OpenAPI document with who may call it, and filters.
import { mount } from '@vue/test-utils';
import { describe, expect, it } from 'vitest';
import { nextTick } from 'vue';
import { createVuetify } from 'vuetify';
import ApiOperationList from '@/components/ApiOperationList.vue';

const vuetify = createVuetify();
const document = {
  info: { title: 'Plumbline API', version: '9.9.9', description: 'Routes.' },
  paths: {
    '/api/health': { get: { summary: 'service status', 'x-plumbline-access': 'public', 'x-plumbline-roles': [] } },
    '/api/runs/{id}': {
      get: {
        summary: 'one run',
        'x-plumbline-access': 'roles',
        'x-plumbline-roles': ['statistician', 'chair'],
        parameters: [{ name: 'id', in: 'path', required: true, schema: { type: 'string' } }],
      },
    },
    '/api/runs': {
      post: {
        summary: 'queue a run',
        'x-plumbline-access': 'roles',
        'x-plumbline-roles': ['steward'],
        requestBody: { content: { 'application/json': { schema: { type: 'object', required: ['cohortVersionId'] } } } },
      },
    },
  },
};

describe('ApiOperationList', () => {
  it('groups operations by their first path segment and says who may call each', async () => {
    const w = mount(ApiOperationList, { props: { document }, global: { plugins: [vuetify] } });
    expect(w.findAll('h2').map((h) => h.text())).toEqual(['/api/health', '/api/runs']);
    expect(w.findAll('[data-operation]').map((e) => e.attributes('data-operation'))).toEqual([
      'get /api/health',
      'get /api/runs/{id}',
      'post /api/runs',
    ]);
    await w.find('[data-operation="get /api/runs/{id}"] button').trigger('click');
    await nextTick();
    expect(w.find('[data-operation="get /api/runs/{id}"]').text()).toContain('Who may call it: statistician, chair');
  });

  it('filters by method, path or summary, and says when nothing matches', async () => {
    const w = mount(ApiOperationList, { props: { document }, global: { plugins: [vuetify] } });
    await w.find('input').setValue('queue');
    expect(w.findAll('[data-operation]').map((e) => e.attributes('data-operation'))).toEqual(['post /api/runs']);
    await w.find('input').setValue('no such route');
    expect(w.findAll('[data-operation]')).toHaveLength(0);
    expect(w.text()).toContain('No route matches');
  });
});
