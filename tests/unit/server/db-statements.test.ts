import { describe, expect, it } from 'vitest';
import Database from 'better-sqlite3';
import { keepStatements } from '../../../server/db';

describe('statements kept per connection', () => {
  it('prepares each SQL text once, and the kept statement gives current answers', () => {
    const conn = new Database(':memory:');
    const prepare = conn.prepare.bind(conn);
    const prepared: string[] = [];
    conn.prepare = ((sql: string) => (prepared.push(sql), prepare(sql))) as typeof conn.prepare;
    keepStatements(conn);
    conn.prepare('create table t (x integer)').run();
    const count = 'select count(*) as n from t';
    expect((conn.prepare(count).get() as { n: number }).n).toBe(0);
    conn.prepare('insert into t (x) values (?)').run(1);
    conn.prepare('insert into t (x) values (?)').run(2);
    expect((conn.prepare(count).get() as { n: number }).n).toBe(2);
    expect(prepared).toEqual(['create table t (x integer)', count, 'insert into t (x) values (?)']);
    // A schema change: SQLite prepares the kept statement again by itself.
    conn.prepare('alter table t add column y text').run();
    expect(conn.prepare('select * from t order by x').all()).toEqual([{ x: 1, y: null }, { x: 2, y: null }]);
    conn.close();
  });

  it('keeps at most its size, the least recently used going first', () => {
    const made: string[] = [];
    const conn = { pragma: () => null, prepare: (sql: string) => (made.push(sql), { sql }) };
    keepStatements(conn, 2);
    conn.prepare('a');
    conn.prepare('b');
    conn.prepare('a'); // a is now the most recent
    conn.prepare('c'); // b goes
    conn.prepare('a');
    conn.prepare('b');
    expect(made).toEqual(['a', 'b', 'c', 'b']);
  });
});
