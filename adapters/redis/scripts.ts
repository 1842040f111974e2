// The Lua scripts of the Redis store. Each touches only keys of one hash tag (one session, or one
// user's session set), so it runs atomically on a single Redis and on Redis Cluster alike. They are
// sent by SHA (EVALSHA) and re-sent in full once when a server answers NOSCRIPT (e.g. after a restart).

import { createHash } from 'node:crypto';

export interface LuaScript {
  readonly name: string;
  readonly lua: string;
  readonly sha: string;
  readonly keys: number;
}

function script(name: string, keys: number, lua: string): LuaScript {
  return { name, keys, lua, sha: createHash('sha1').update(lua).digest('hex') };
}

/**
 * Load one session in one round trip.
 * KEYS: meta, slots. ARGV: cached "epoch:version" or ''.
 * Reply: nil (no session) | {v, ep} (cache still valid) | {v, ep, clock, turns, cap, dim, {field, payload, ...}}.
 */
export const LOAD = script('load', 2, `
local m = redis.call('HMGET', KEYS[1], 'v', 'ep', 'c', 'n', 'cap', 'dim')
if not m[1] then return false end
local ep = m[2] or ''
if ARGV[1] ~= '' and ARGV[1] == (ep .. ':' .. m[1]) then return {m[1], ep} end
return {m[1], ep, m[3] or '', m[4] or '', m[5] or '', m[6] or '', redis.call('HGETALL', KEYS[2])}
`);

/**
 * Commit one turn in one round trip: check the version, apply slot ops, store archive items, append
 * events (capped), bump the version, refresh the idle TTL.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog.
 * ARGV: 1 expected version, 2 commit id, 3 epoch for a new session, 4 clock, 5 turns, 6 capacity,
 *       7 dim, 8 user or '', 9 ttl seconds (0 = none), 10 max events, 11 reserved (''),
 *       12 #ops, 13 #archive items, 14 #events, then #ops x (index, payload or '' to free),
 *       #archive x (id, payload), #events x json.
 * The commit id is remembered for the session's last 16 commits (meta field `rc`).
 * Reply: {1, version, epoch} applied | {2, version, epoch} this commit id was already applied at `version` |
 *        {0, version, epoch} version mismatch.
 */
export const COMMIT = script('commit', 7, `
local m = redis.call('HMGET', KEYS[1], 'v', 'ep', 'cap', 'dim', 'rc')
local v = tonumber(m[1] or '0')
local rc = m[5] or ''
-- A commit id already applied (its reply lost in a disconnect, then sent again — even re-planned on
-- top of its own result) is reported as applied and not applied a second time.
local _, hit = string.find(' ' .. rc, ' ' .. ARGV[2] .. '=', 1, true)
if hit then return {2, tonumber(string.match(' ' .. rc, '^%d+', hit + 1)), m[2] or ''} end
if v ~= tonumber(ARGV[1]) then return {0, v, m[2] or ''} end
local ep = m[2]
if not m[1] then
  -- A new session (or one erased or expired) starts from nothing, whatever a partial state left behind.
  ep = ARGV[3]
  redis.call('DEL', KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7])
end
local cap = tonumber(ARGV[6])
if m[1] then
  local oldcap = tonumber(m[3] or '0')
  if tonumber(m[4] or '0') ~= tonumber(ARGV[7]) then
    redis.call('DEL', KEYS[2])
  elseif oldcap > cap then
    for i = cap, oldcap - 1 do redis.call('HDEL', KEYS[2], tostring(i)) end
  end
end
local nops, narch, nev = tonumber(ARGV[12]), tonumber(ARGV[13]), tonumber(ARGV[14])
local a = 15
for i = 1, nops do
  if ARGV[a + 1] == '' then redis.call('HDEL', KEYS[2], ARGV[a]) else redis.call('HSET', KEYS[2], ARGV[a], ARGV[a + 1]) end
  a = a + 2
end
local fields = {'v', v + 1, 'ep', ep, 'c', ARGV[4], 'n', ARGV[5], 'cap', ARGV[6], 'dim', ARGV[7]}
if not m[1] then
  -- Archive epochs start fresh with the session, so no cached copy of an erased one can match.
  fields[#fields + 1] = 'as'
  fields[#fields + 1] = ep
  fields[#fields + 1] = 'au'
  fields[#fields + 1] = ep
end
if ARGV[8] ~= '' then
  fields[#fields + 1] = 'u'
  fields[#fields + 1] = ARGV[8]
end
if narch > 0 then
  -- Items go to the hash; their ids are appended to the log so readers fetch only what is new.
  local h, log = KEYS[4], KEYS[6]
  if ARGV[8] ~= '' then h, log = KEYS[5], KEYS[7] end
  for i = 1, narch do
    redis.call('HSET', h, ARGV[a], ARGV[a + 1])
    redis.call('RPUSH', log, ARGV[a])
    a = a + 2
  end
end
local maxe = tonumber(ARGV[10])
for i = 1, nev do
  if maxe > 0 then redis.call('XADD', KEYS[3], 'MAXLEN', '~', maxe, '*', 'e', ARGV[a]) end
  a = a + 1
end
local keep, n = {ARGV[2] .. '=' .. (v + 1)}, 1
for tok in string.gmatch(rc, '%S+') do
  if n >= 16 then break end
  n = n + 1
  keep[n] = tok
end
fields[#fields + 1] = 'rc'
fields[#fields + 1] = table.concat(keep, ' ')
redis.call('HSET', KEYS[1], unpack(fields))
local ttl = tonumber(ARGV[9])
for i = 1, 7 do
  if ttl > 0 then redis.call('EXPIRE', KEYS[i], ttl) else redis.call('PERSIST', KEYS[i]) end
end
return {1, v + 1, ep}
`);

/**
 * Fetch what is new in one archive hash of a session.
 * KEYS: meta, hash (arch | uarch), log (alog | ualog). ARGV: epoch field ('as' | 'au'), '=' .. cached
 * epoch or '' (nothing cached), cached log length.
 * Reply: nil (no session) | {epoch, n} (unchanged) | {epoch, n, 'd', {id, payload, ...}} (items appended
 * since the cached length) | {epoch, n, 'f', {id, payload, ...}} (everything: first fetch or epoch moved).
 */
export const ARCHIVE_FETCH = script('archive_fetch', 3, `
if redis.call('EXISTS', KEYS[1]) == 0 then return false end
local ep = redis.call('HGET', KEYS[1], ARGV[1]) or ''
local n = redis.call('LLEN', KEYS[3])
local from = tonumber(ARGV[3])
if ARGV[2] ~= '' and ARGV[2] == ('=' .. ep) and n >= from and n - from <= 1000 then
  if n == from then return {ep, n} end
  local ids = redis.call('LRANGE', KEYS[3], from, n - 1)
  local vals = redis.call('HMGET', KEYS[2], unpack(ids))
  local out = {}
  for i = 1, #ids do
    if vals[i] then
      out[#out + 1] = ids[i]
      out[#out + 1] = vals[i]
    end
  end
  return {ep, n, 'd', out}
end
return {ep, n, 'f', redis.call('HGETALL', KEYS[2])}
`);

/**
 * Delete archive items of one session hash by id; moves the epoch so cached copies refetch in full.
 * KEYS: meta, hash, log. ARGV: epoch field, new epoch, ids... Reply: number removed.
 */
export const ARCHIVE_DELETE = script('archive_delete', 3, `
local n = 0
for i = 3, #ARGV do
  local d = redis.call('HDEL', KEYS[2], ARGV[i])
  if d > 0 then redis.call('LREM', KEYS[3], 0, ARGV[i]) end
  n = n + d
end
if n > 0 and redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HSET', KEYS[1], ARGV[1], ARGV[2]) end
return n
`);

/**
 * Erase one session: count, then delete every key.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog. Reply: {existed, slots, archive items, events, user or ''}.
 */
export const ERASE = script('erase', 7, `
local existed = redis.call('EXISTS', KEYS[1])
local user = redis.call('HGET', KEYS[1], 'u') or ''
local slots = redis.call('HLEN', KEYS[2])
local items = redis.call('HLEN', KEYS[4]) + redis.call('HLEN', KEYS[5])
local events = redis.call('XLEN', KEYS[3])
redis.call('DEL', KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7])
return {existed, slots, items, events, user}
`);
