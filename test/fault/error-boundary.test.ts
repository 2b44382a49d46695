// The pages' error notice (components/ErrorNotice.tsx, used by app/error.tsx and
// app/global-error.tsx): it asks /api/ready whether the database is down, and never shows a
// stack. Expected texts are the component's own constants, checked word for word once here.
import { createElement } from 'react';
import { renderToStaticMarkup } from 'react-dom/server';
import { describe, expect, it } from 'vitest';
import { ErrorNotice, PAGE_MESSAGES, verdictFromReadiness } from '@/components/ErrorNotice';

const answer = (status: number, body: unknown) => ({ status, json: async () => body });

describe('page error notice', () => {
  it('calls it an outage only when readiness answers 503 because of the database', async () => {
    expect(await verdictFromReadiness(answer(503, { ready: false, reason: 'database', message: 'The database is not answering.' }))).toBe('outage');
    expect(await verdictFromReadiness(answer(503, { ready: false, reason: 'migrations' }))).toBe('fault');
    expect(await verdictFromReadiness(answer(200, { ready: true }))).toBe('fault');
    expect(await verdictFromReadiness(answer(502, 'Bad Gateway'))).toBe('fault');
    expect(await verdictFromReadiness({ status: 503, json: async () => Promise.reject(new SyntaxError('not JSON')) })).toBe('fault');
  });

  it('renders a heading, the message, a Try again button and the digest, never the error text or stack', () => {
    const error = Object.assign(new Error('connect ECONNREFUSED 10.0.0.5:5432'), { digest: '2716370341' });
    const html = renderToStaticMarkup(createElement(ErrorNotice, { error, retry: () => undefined }));
    expect(html).toContain('<h1 class="text-2xl font-semibold">This page could not be shown</h1>');
    expect(html).toContain(PAGE_MESSAGES.checking);
    expect(html).toContain('>Try again</button>');
    expect(html).toContain('Reference for the server log: 2716370341');
    expect(html).not.toContain('ECONNREFUSED');
    expect(html).not.toMatch(/at .*:\d+:\d+/);
    expect(PAGE_MESSAGES.outage).toBe('The database is not answering right now, so this page could not be shown. Nothing was lost; try again in a moment.');
  });
});
