// The structured logger (lib/server/log.ts): one JSON object per line, level filtering, child
// fields. Expected lines are hand-worked from the format {time, level, msg, ...fields}.
import { describe, expect, it, vi } from 'vitest';
import { configuredLogLevel, createLogger, formatLine } from '@/lib/server/log';
import type { LogLevel } from '@/lib/server/env';

const T = new Date('2026-03-01T12:00:00.000Z');

function capture(level?: LogLevel) {
  const lines: { line: string; level: LogLevel }[] = [];
  const logger = createLogger({}, { level, now: () => T, write: (line, l) => lines.push({ line, level: l }) });
  return { logger, lines };
}

describe('structured logger', () => {
  it('writes one JSON object per line with time, level, msg first, then the fields', () => {
    const { logger, lines } = capture('debug');
    logger.info('fit done', { projectId: 'p1', ms: 12 });
    expect(lines).toEqual([{ line: '{"time":"2026-03-01T12:00:00.000Z","level":"info","msg":"fit done","projectId":"p1","ms":12}', level: 'info' }]);
  });

  it('keeps a message with line breaks on one line', () => {
    const line = formatLine(T, 'warn', 'two\nlines', { detail: 'a\nb' });
    expect(line.split('\n')).toHaveLength(1);
    expect(JSON.parse(line)).toEqual({ time: '2026-03-01T12:00:00.000Z', level: 'warn', msg: 'two\nlines', detail: 'a\nb' });
  });

  it('drops lines below the level', () => {
    const { logger, lines } = capture('warn');
    logger.debug('d');
    logger.info('i');
    logger.warn('w');
    logger.error('e');
    expect(lines.map((l) => JSON.parse(l.line).msg)).toEqual(['w', 'e']);
  });

  it('child loggers add their fields; a call’s own fields win; time/level/msg cannot be overwritten', () => {
    const { logger, lines } = capture('debug');
    const child = logger.child({ worker: 'fit', jobId: 'a' }).child({ jobId: 'b' });
    child.info('start', { attempt: 2, level: 'bogus', msg: 'bogus' });
    expect(JSON.parse(lines[0].line)).toEqual({ time: '2026-03-01T12:00:00.000Z', level: 'info', msg: 'start', worker: 'fit', jobId: 'b', attempt: 2 });
  });

  it('writes errors as name, message, code and stack; bigint as a string; never throws on a cycle', () => {
    const err = Object.assign(new Error('boom'), { code: 'E42' });
    const parsed = JSON.parse(formatLine(T, 'error', 'failed', { error: err, n: 10n }));
    expect(parsed.error).toMatchObject({ name: 'Error', message: 'boom', code: 'E42' });
    expect(parsed.error.stack).toContain('boom');
    expect(parsed.n).toBe('10');
    const cyclic: Record<string, unknown> = {};
    cyclic.self = cyclic;
    expect(JSON.parse(formatLine(T, 'info', 'cycle', { cyclic }))).toEqual({ time: '2026-03-01T12:00:00.000Z', level: 'info', msg: 'cycle', cyclic: '[object Object]' });
  });

  it('reads BORDERLINE_LOG_LEVEL; unset or unknown counts as info', () => {
    expect(configuredLogLevel({ BORDERLINE_LOG_LEVEL: 'debug' })).toBe('debug');
    expect(configuredLogLevel({ BORDERLINE_LOG_LEVEL: ' error ' })).toBe('error');
    expect(configuredLogLevel({})).toBe('info');
    expect(configuredLogLevel({ BORDERLINE_LOG_LEVEL: 'verbose' })).toBe('info');
  });

  it('sends warn and error to stderr, debug and info to stdout by default', () => {
    const out = vi.spyOn(process.stdout, 'write').mockImplementation(() => true);
    const err = vi.spyOn(process.stderr, 'write').mockImplementation(() => true);
    try {
      const logger = createLogger({}, { level: 'debug', now: () => T });
      logger.debug('a');
      logger.info('b');
      logger.warn('c');
      logger.error('d');
      expect(out.mock.calls.map((c) => JSON.parse(String(c[0])).msg)).toEqual(['a', 'b']);
      expect(err.mock.calls.map((c) => JSON.parse(String(c[0])).msg)).toEqual(['c', 'd']);
      expect(String(out.mock.calls[0][0]).endsWith('}\n')).toBe(true);
    } finally {
      out.mockRestore();
      err.mockRestore();
    }
  });
});
