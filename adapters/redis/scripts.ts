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
 * Commit one turn in one round trip: check the version, apply slot ops, add logbook entries, apply
 * the retention policy to the logbook slice written, append events (capped), bump the version,
 * refresh the idle TTL.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog, [stats] (the store-wide counters; standalone only).
 * ARGV: 1 expected version, 2 commit id, 3 epoch for a new session, 4 clock, 5 turns, 6 capacity,
 *       7 dim, 8 user or '', 9 ttl seconds (0 = none), 10 max events, 11 retention: max entries per
 *       slice (0 = none), 12 retention: age cutoff in epoch ms (0 = none), 13 #ops, 14 #logbook entries,
 *       15 #events, then #ops x (index, payload or '' to free), #entries x (id, atMs, payload), #events x json.
 * A logbook slice is a hash (id -> payload) and a log of `atMs:id` elements in arrival order; entries
 * trimmed by retention leave from the head of the log, and the meta field `ah` / `auh` counts them so
 * readers keep fetching only the new tail. The commit id is remembered for the session's last 16
 * commits (meta field `rc`).
 * Reply: {1, version, epoch, dropped by age, dropped by count} applied | {2, version, epoch} this commit
 *        id was already applied at `version` | {0, version, epoch} version mismatch.
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
local statS0 = m[1] and redis.call('HLEN', KEYS[2]) or 0 -- [stats] slots before this commit
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
local nops, nlb, nev = tonumber(ARGV[13]), tonumber(ARGV[14]), tonumber(ARGV[15])
local a = 16
for i = 1, nops do
  if ARGV[a + 1] == '' then redis.call('HDEL', KEYS[2], ARGV[a]) else redis.call('HSET', KEYS[2], ARGV[a], ARGV[a + 1]) end
  a = a + 2
end
local fields = {'v', v + 1, 'ep', ep, 'c', ARGV[4], 'n', ARGV[5], 'cap', ARGV[6], 'dim', ARGV[7]}
if not m[1] then
  -- Logbook epochs and heads start fresh with the session, so no cached copy of an erased one can match.
  for _, f in ipairs({'as', ep, 'au', ep, 'ah', 0, 'auh', 0}) do fields[#fields + 1] = f end
end
if ARGV[8] ~= '' then
  fields[#fields + 1] = 'u'
  fields[#fields + 1] = ARGV[8]
end
local h, log, headf = KEYS[4], KEYS[6], 'ah'
if ARGV[8] ~= '' then h, log, headf = KEYS[5], KEYS[7], 'auh' end
local statL0 = redis.call('HLEN', h) -- [stats] logbook entries of the slice before this commit
for i = 1, nlb do
  -- An id already present is replaced in place (a resent turn); only a new one joins the log.
  if redis.call('HSET', h, ARGV[a], ARGV[a + 2]) == 1 then redis.call('RPUSH', log, ARGV[a + 1] .. ':' .. ARGV[a]) end
  a = a + 3
end
-- Retention: oldest first from the head of the log, by age then by count. A popped element whose
-- entry was already deleted (a tombstone) is not counted.
local dropAge, dropCount, popped = 0, 0, 0
local maxn, cutoff = tonumber(ARGV[11]), tonumber(ARGV[12])
local function pop()
  local e = redis.call('LPOP', log)
  if not e then return nil end
  popped = popped + 1
  local id = string.match(e, '^%-?%d+:(.*)$') or e
  return redis.call('HDEL', h, id)
end
if cutoff > 0 then
  while true do
    local e = redis.call('LINDEX', log, 0)
    if not e then break end
    local at = tonumber(string.match(e, '^(%-?%d+):'))
    if at == nil or at >= cutoff then break end
    dropAge = dropAge + pop()
  end
end
if maxn > 0 then
  while redis.call('HLEN', h) > maxn do
    local d = pop()
    if d == nil then break end
    dropCount = dropCount + d
  end
end
if popped > 0 then
  fields[#fields + 1] = headf
  fields[#fields + 1] = tonumber(redis.call('HGET', KEYS[1], headf) or '0') + popped
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
-- [stats] Store-wide counters (KEYS[8], standalone Redis only: on Cluster it would cross hash slots).
if KEYS[8] then
  if not m[1] then redis.call('HINCRBY', KEYS[8], 'sessions', 1) end
  redis.call('HINCRBY', KEYS[8], 'slots', redis.call('HLEN', KEYS[2]) - statS0)
  redis.call('HINCRBY', KEYS[8], 'logbook', redis.call('HLEN', h) - statL0)
end
return {1, v + 1, ep, dropAge, dropCount}
`);

/**
 * Fetch what is new in one logbook slice of a session.
 * KEYS: meta, hash (arch | uarch), log (alog | ualog). ARGV: epoch field ('as' | 'au'), head field
 * ('ah' | 'auh'), '=' .. cached epoch or '' (nothing cached), cached absolute end of the log.
 * Positions are absolute: the head counts elements trimmed from the front since the session began.
 * Reply: nil (no session) | {epoch, head, end} (unchanged) | {epoch, head, end, 'd', elements, payloads}
 * (the elements after the cached end) | {epoch, head, end, 'f', elements, payloads} (everything: first
 * fetch, epoch moved, or too far behind). Payloads align with elements; a deleted entry's is false.
 */
export const LOG_FETCH = script('log_fetch', 3, `
if redis.call('EXISTS', KEYS[1]) == 0 then return false end
local mh = redis.call('HMGET', KEYS[1], ARGV[1], ARGV[2])
local ep = mh[1] or ''
local head = tonumber(mh[2] or '0')
local n = redis.call('LLEN', KEYS[3])
local stop = head + n
local from = tonumber(ARGV[4])
local mode = 'f'
local els
if ARGV[3] ~= '' and ARGV[3] == ('=' .. ep) and from >= head and from <= stop and stop - from <= 1000 then
  if from == stop then return {ep, head, stop} end
  mode = 'd'
  els = redis.call('LRANGE', KEYS[3], from - head, -1)
else
  els = redis.call('LRANGE', KEYS[3], 0, -1)
end
local vals = {}
-- HMGET in chunks: unpack() of thousands of arguments overflows Lua's C stack.
for c = 1, #els, 500 do
  local ids = {}
  for i = c, math.min(c + 499, #els) do ids[#ids + 1] = string.match(els[i], '^%-?%d+:(.*)$') or els[i] end
  local got = redis.call('HMGET', KEYS[2], unpack(ids))
  for i = 1, #got do vals[#vals + 1] = got[i] end
end
return {ep, head, stop, mode, els, vals}
`);

/**
 * Delete logbook entries of one session slice by id, with their log elements (so an id added again
 * later is not popped early by an old element); moves the epoch so cached copies refetch in full.
 * O(log length): deletes are rare (a promotion, an edit), never per turn.
 * KEYS: meta, hash, log, [stats]. ARGV: epoch field, new epoch, ids... Reply: number removed.
 */
export const LOG_DELETE = script('log_delete', 3, `
local want, n = {}, 0
for i = 3, #ARGV do
  if redis.call('HDEL', KEYS[2], ARGV[i]) == 1 then
    want[ARGV[i]] = true
    n = n + 1
  end
end
if n == 0 then return 0 end
if KEYS[4] then redis.call('HINCRBY', KEYS[4], 'logbook', 0 - n) end -- [stats]
for _, e in ipairs(redis.call('LRANGE', KEYS[3], 0, -1)) do
  local id = string.match(e, '^%-?%d+:(.*)$') or e
  if want[id] then redis.call('LREM', KEYS[3], 1, e) end
end
if redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HSET', KEYS[1], ARGV[1], ARGV[2]) end
return n
`);

/**
 * Erase one session: count, then delete every key.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog, [stats]. Reply: {existed, slots, logbook entries, events, user or ''}.
 */
export const ERASE = script('erase', 7, `
local existed = redis.call('EXISTS', KEYS[1])
local user = redis.call('HGET', KEYS[1], 'u') or ''
local slots = redis.call('HLEN', KEYS[2])
local items = redis.call('HLEN', KEYS[4]) + redis.call('HLEN', KEYS[5])
local events = redis.call('XLEN', KEYS[3])
redis.call('DEL', KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7])
if KEYS[8] then -- [stats] (0 - x, not -x: Lua's -0 reaches Redis as "-0", which HINCRBY refuses)
  redis.call('HINCRBY', KEYS[8], 'sessions', 0 - existed)
  redis.call('HINCRBY', KEYS[8], 'slots', 0 - slots)
  redis.call('HINCRBY', KEYS[8], 'logbook', 0 - items)
end
return {existed, slots, items, events, user}
`);
