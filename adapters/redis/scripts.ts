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
 * [stats] The store-wide figures, standalone Redis only (on Cluster these keys would cross hash slots,
 * so the store passes none and counts by SCAN). Appended to the KEYS of every script that changes a
 * session, from position `s`: the tenant's counters hash (sessions, slots, logbook), its tally (session
 * base -> "exists slots logbook" as last counted), its due set (session base scored by when its keys
 * expire by TTL) and two age indexes (session base scored by its oldest slot's creation time, and by its
 * oldest logbook entry's time). `restat` counts the session again and moves the counters by the
 * difference from its tally (or, for a session counted before tallies existed, from the figures the
 * script saw first), so no path — commit, erase, quarantine, delete, sweep, TTL expiry found by the
 * sweep — leaves them drifting. Defines `figures(...)` and `restat(...)` for the script that includes it.
 */
function statsLua(s: number): string {
  return `
local S = ${s}
local function figures(meta, slots, arch, uarch)
  if not KEYS[S] or redis.call('EXISTS', meta) == 0 then return {0, 0, 0} end
  return {1, redis.call('HLEN', slots), redis.call('HLEN', arch) + redis.call('HLEN', uarch)}
end
local function headAt(log)
  local e = redis.call('LINDEX', log, 0)
  return e and tonumber(string.match(e, '^(%-?%d+):')) or nil
end
-- expireAt: ms the session's keys expire at, 0 = never, -1 = unchanged.
local function restat(before, meta, slots, arch, uarch, alog, ualog, born, expireAt)
  if not KEYS[S] then return end
  local member = string.sub(meta, 1, -6)
  local now = figures(meta, slots, arch, uarch)
  local old = before
  local t = redis.call('HGET', KEYS[S + 1], member)
  if t then
    local a, b, c = string.match(t, '^(%d+) (%d+) (%d+)$')
    if a then old = {tonumber(a), tonumber(b), tonumber(c)} end
  end
  if now[1] ~= old[1] then redis.call('HINCRBY', KEYS[S], 'sessions', now[1] - old[1]) end
  if now[2] ~= old[2] then redis.call('HINCRBY', KEYS[S], 'slots', now[2] - old[2]) end
  if now[3] ~= old[3] then redis.call('HINCRBY', KEYS[S], 'logbook', now[3] - old[3]) end
  if now[1] == 0 then
    redis.call('HDEL', KEYS[S + 1], member)
    redis.call('ZREM', KEYS[S + 2], member)
    redis.call('ZREM', KEYS[S + 3], member)
    redis.call('ZREM', KEYS[S + 4], member)
    return
  end
  redis.call('HSET', KEYS[S + 1], member, now[1] .. ' ' .. now[2] .. ' ' .. now[3])
  if expireAt > 0 then redis.call('ZADD', KEYS[S + 2], expireAt, member) elseif expireAt == 0 then redis.call('ZREM', KEYS[S + 2], member) end
  local first = redis.call('ZRANGE', born, 0, 0, 'WITHSCORES')
  if first[2] then redis.call('ZADD', KEYS[S + 3], first[2], member) else redis.call('ZREM', KEYS[S + 3], member) end
  local la, lu = headAt(alog), headAt(ualog)
  local oldest = la
  if lu and (not oldest or lu < oldest) then oldest = lu end
  if oldest then redis.call('ZADD', KEYS[S + 4], oldest, member) else redis.call('ZREM', KEYS[S + 4], member) end
end
`;
}

/** How many keys the store appends for the [stats] (see statsLua). */
export const STATS_KEYS = 5;

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
 * Commit one turn in one round trip: refuse a write fenced before an erase, recognise a commit id
 * already applied, check the version, apply slot ops, add logbook entries, apply the retention policy
 * to the logbook slice written, append events (capped), bump the version, refresh the idle TTL.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog, gone (erase tombstone), cids (applied commit ids),
 * born (slot creation times), [stats] (see statsLua; standalone only).
 * ARGV: 1 expected version, 2 commit id, 3 epoch for a new session, 4 clock, 5 turns, 6 capacity,
 *       7 dim, 8 user or '', 9 ttl seconds (0 = none), 10 max events, 11 retention: max entries per
 *       slice (0 = none), 12 retention: age cutoff in epoch ms (0 = none), 13 #ops, 14 #logbook entries,
 *       15 #events, 16 fence: the session's erase time the writer saw ('' = none), 17 fence: the
 *       writer's clock when it accepted the turn ('' = unfenced), 18 fence ttl seconds (how long
 *       ids and tombstones live), then #ops x (index, payload or '' to free, creation ms), #entries x (id, atMs, payload), #events x json,
 *       then [stats] counter increments as (field, delta) pairs to the end.
 * A logbook slice is a hash (id -> payload) and a log of `atMs:id` elements in arrival order; entries
 * trimmed by retention leave from the head of the log, and the meta field `ah` / `auh` counts them so
 * readers keep fetching only the new tail. Applied commit ids are kept in a sorted set scored by the
 * server's time, for ARGV[18] seconds: longer than any write may wait in an outbox, so a resend is
 * recognised however many commits came between.
 * Reply: {1, version, epoch, dropped by age, dropped by count} applied | {2, version, epoch} this commit
 *        id was already applied | {0, version, epoch} version mismatch | {3, version, epoch} the
 *        session was erased after the writer's fence.
 */
export const COMMIT = script('commit', 10, statsLua(11) + `
local m = redis.call('HMGET', KEYS[1], 'v', 'ep', 'cap', 'dim', 'rc')
local v = tonumber(m[1] or '0')
-- Fenced: refused when the session was erased after the writer looked, or not before it accepted the turn.
local gone = tonumber(redis.call('GET', KEYS[8]) or '0')
if (ARGV[16] ~= '' and gone > tonumber(ARGV[16])) or (ARGV[17] ~= '' and gone >= tonumber(ARGV[17])) then return {3, v, m[2] or ''} end
local t = redis.call('TIME')
local nowms = tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000)
local keepfor = tonumber(ARGV[18])
-- A commit id already applied (its reply lost in a disconnect, then sent again — even re-planned on
-- top of its own result, after any number of other commits) is reported as applied, not applied again.
if redis.call('ZSCORE', KEYS[9], ARGV[2]) then return {2, v, m[2] or ''} end
-- Sessions written before ids moved to their own set kept the last 16 in meta field rc.
local rc = m[5] or ''
if string.find(' ' .. rc, ' ' .. ARGV[2] .. '=', 1, true) then return {2, v, m[2] or ''} end
if v ~= tonumber(ARGV[1]) then return {0, v, m[2] or ''} end
local before = figures(KEYS[1], KEYS[2], KEYS[4], KEYS[5]) -- [stats]
local ep = m[2]
if not m[1] then
  -- A new session (or one erased or expired) starts from nothing, whatever a partial state left behind.
  ep = ARGV[3]
  redis.call('DEL', KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[10])
end
local cap = tonumber(ARGV[6])
if m[1] then
  local oldcap = tonumber(m[3] or '0')
  if tonumber(m[4] or '0') ~= tonumber(ARGV[7]) then
    redis.call('DEL', KEYS[2], KEYS[10])
  elseif oldcap > cap then
    for i = cap, oldcap - 1 do
      redis.call('HDEL', KEYS[2], tostring(i))
      redis.call('ZREM', KEYS[10], tostring(i))
    end
  end
end
local nops, nlb, nev = tonumber(ARGV[13]), tonumber(ARGV[14]), tonumber(ARGV[15])
local a = 19
for i = 1, nops do
  if ARGV[a + 1] == '' then
    redis.call('HDEL', KEYS[2], ARGV[a])
    redis.call('ZREM', KEYS[10], ARGV[a])
  else
    redis.call('HSET', KEYS[2], ARGV[a], ARGV[a + 1])
    redis.call('ZADD', KEYS[10], tonumber(ARGV[a + 2]), ARGV[a])
  end
  a = a + 3
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
redis.call('ZREMRANGEBYSCORE', KEYS[9], '-inf', nowms - keepfor * 1000)
redis.call('ZADD', KEYS[9], nowms, ARGV[2])
redis.call('EXPIRE', KEYS[9], keepfor)
if rc ~= '' then redis.call('HDEL', KEYS[1], 'rc') end
redis.call('HSET', KEYS[1], unpack(fields))
local ttl = tonumber(ARGV[9])
for _, i in ipairs({1, 2, 3, 4, 5, 6, 7, 10}) do
  if ttl > 0 then redis.call('EXPIRE', KEYS[i], ttl) else redis.call('PERSIST', KEYS[i]) end
end
restat(before, KEYS[1], KEYS[2], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[10], ttl > 0 and (nowms + ttl * 1000) or 0)
-- The commit's own counter increments (field, delta pairs after the events): slot survival counts.
if KEYS[S] then
  while ARGV[a] do
    redis.call('HINCRBY', KEYS[S], ARGV[a], ARGV[a + 1])
    a = a + 2
  end
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
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, then the hash and log of the slice (two of the
 * above), [stats]. ARGV: epoch field, new epoch, ids... Reply: number removed.
 */
export const LOG_DELETE = script('log_delete', 9, statsLua(10) + `
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local h, log = KEYS[8], KEYS[9]
local want, n = {}, 0
for i = 3, #ARGV do
  if redis.call('HDEL', h, ARGV[i]) == 1 then
    want[ARGV[i]] = true
    n = n + 1
  end
end
if n == 0 then return 0 end
for _, e in ipairs(redis.call('LRANGE', log, 0, -1)) do
  local id = string.match(e, '^%-?%d+:(.*)$') or e
  if want[id] then redis.call('LREM', log, 1, e) end
end
if redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HSET', KEYS[1], ARGV[1], ARGV[2]) end
restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
return n
`);

/**
 * Erase one session: move its tombstone forward (so no write fenced before now can land), count,
 * then delete every key.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog, gone, cids, born, quarantine, [stats] (standalone only).
 * ARGV: 1 tombstone ttl seconds, 2 the time of the user erase this is part of (ms; 0 for a session erase).
 * Reply: {existed, slots, logbook entries, events, user or '', tombstone time}.
 */
export const ERASE = script('erase', 11, statsLua(12) + `
local t = redis.call('TIME')
local at = math.max(tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000), tonumber(ARGV[2]), tonumber(redis.call('GET', KEYS[8]) or '0') + 1)
redis.call('SET', KEYS[8], at, 'EX', tonumber(ARGV[1]))
local existed = redis.call('EXISTS', KEYS[1])
local user = redis.call('HGET', KEYS[1], 'u') or ''
local slots = redis.call('HLEN', KEYS[2])
local items = redis.call('HLEN', KEYS[4]) + redis.call('HLEN', KEYS[5])
local events = redis.call('XLEN', KEYS[3])
local before = figures(KEYS[1], KEYS[2], KEYS[4], KEYS[5])
redis.call('DEL', KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[9], KEYS[10], KEYS[11])
restat(before, KEYS[1], KEYS[2], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[10], 0)
return {existed, slots, items, events, user, tostring(at)}
`);

/**
 * Link a session to its user, unless the user was erased after the writer's fence. Runs before every
 * commit that may be a session's first under its user, on the user's hash tag, so it and a user erase
 * (USER_ERASE) are atomic with respect to each other: a session is either in the set the erase reads,
 * or refused here.
 * KEYS: the user's session set, the user's tombstone. ARGV: session, the user's erase time the writer
 * saw ('' = none), the writer's clock when it accepted the turn ('' = unfenced).
 * Reply: 1 linked | 0 refused (erased after the fence).
 */
export const LINK = script('link', 2, `
local gone = tonumber(redis.call('GET', KEYS[2]) or '0')
if (ARGV[2] ~= '' and gone > tonumber(ARGV[2])) or (ARGV[3] ~= '' and gone >= tonumber(ARGV[3])) then return 0 end
redis.call('SADD', KEYS[1], ARGV[1])
return 1
`);

/**
 * First step of a user erase: move the user's tombstone forward (from here on LINK and USER_CAP refuse
 * writes fenced before it), delete the user's entry index and read the sessions to erase.
 * KEYS: the user's session set, the user's tombstone, the user's entry index. ARGV: tombstone ttl seconds.
 * Reply: {tombstone time, {sessions...}}.
 */
export const USER_ERASE = script('user_erase', 3, `
local t = redis.call('TIME')
local at = math.max(tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000), tonumber(redis.call('GET', KEYS[2]) or '0') + 1)
redis.call('SET', KEYS[2], at, 'EX', tonumber(ARGV[1]))
redis.call('DEL', KEYS[3])
return {tostring(at), redis.call('SMEMBERS', KEYS[1])}
`);


/**
 * Move slot payloads that failed their check aside, so the session keeps working: each one still equal
 * to what the reader saw goes from the slots hash to the quarantine hash (field `index@seconds`), and
 * the version moves on, so every process's cached copy and every plan made on it are refreshed.
 * KEYS: meta, slots, quarantine, arch, uarch, alog, ualog, born, [stats]. ARGV: 1 ttl seconds for the
 * quarantine (0 = none), then field, payload pairs.
 * Reply: the number moved.
 */
export const QUARANTINE = script('quarantine', 8, statsLua(9) + `
local before = figures(KEYS[1], KEYS[2], KEYS[4], KEYS[5])
local moved = 0
local t = redis.call('TIME')
for i = 2, #ARGV, 2 do
  local cur = redis.call('HGET', KEYS[2], ARGV[i])
  if cur and cur == ARGV[i + 1] then
    redis.call('HSET', KEYS[3], ARGV[i] .. '@' .. t[1], cur)
    redis.call('HDEL', KEYS[2], ARGV[i])
    redis.call('ZREM', KEYS[8], ARGV[i])
    moved = moved + 1
  end
end
if moved > 0 then
  if redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HINCRBY', KEYS[1], 'v', 1) end
  if tonumber(ARGV[1]) > 0 then redis.call('EXPIRE', KEYS[3], tonumber(ARGV[1])) end
  restat(before, KEYS[1], KEYS[2], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[8], -1)
end
return moved
`);

/**
 * The retention sweep of one session: delete the slots created before a cutoff (found through the
 * `born` index, O(expired)) and the logbook entries (of both slices) older than a cutoff (from the head
 * of each log, O(expired)). Moves the version on when a slot goes, so every cached copy and every plan
 * made on one is refreshed; moves the logbook heads, so every process's index drops the entries on
 * its next look. Idempotent: any number of processes may sweep the same session at once.
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, [stats]. ARGV: 1 slot cutoff (ms, 0 = none),
 * 2 logbook cutoff (ms, 0 = none). Reply: {slots deleted, logbook entries deleted, user or ''}.
 */
export const SWEEP = script('sweep', 7, statsLua(8) + `
if redis.call('EXISTS', KEYS[1]) == 0 then
  restat({0, 0, 0}, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], 0)
  return {0, 0}
end
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local slots, items = 0, 0
local sc, lc = tonumber(ARGV[1]), tonumber(ARGV[2])
if sc > 0 then
  for _, i in ipairs(redis.call('ZRANGEBYSCORE', KEYS[7], '-inf', '(' .. sc)) do
    slots = slots + redis.call('HDEL', KEYS[2], i)
    redis.call('ZREM', KEYS[7], i)
  end
  if slots > 0 then redis.call('HINCRBY', KEYS[1], 'v', 1) end
end
if lc > 0 then
  for _, s in ipairs({{KEYS[3], KEYS[5], 'ah'}, {KEYS[4], KEYS[6], 'auh'}}) do
    local popped = 0
    while true do
      local e = redis.call('LINDEX', s[2], 0)
      if not e then break end
      local at = tonumber(string.match(e, '^(%-?%d+):'))
      if at == nil or at >= lc then break end
      redis.call('LPOP', s[2])
      popped = popped + 1
      items = items + redis.call('HDEL', s[1], string.match(e, '^%-?%d+:(.*)$'))
    end
    if popped > 0 then redis.call('HINCRBY', KEYS[1], s[3], popped) end
  end
end
restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
return {slots, items, redis.call('HGET', KEYS[1], 'u') or ''}
`);

/**
 * The counters of one session counted again (see statsLua): used by the sweep for a session the due
 * set says has expired by TTL, so the counters lose what Redis dropped without a script seeing it.
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, [stats]. Reply: 1 when the session is gone.
 */
export const RESTAT = script('restat', 7, statsLua(8) + `
if not KEYS[S] or not redis.call('HGET', KEYS[S + 1], string.sub(KEYS[1], 1, -6)) then return 0 end
local ttl = redis.call('PTTL', KEYS[1])
local t = redis.call('TIME')
local nowms = tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000)
restat({0, 0, 0}, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], ttl > 0 and (nowms + ttl) or 0)
return ttl == -2 and 1 or 0
`);

/**
 * Move logbook payloads that failed their check aside, so searches of the scope keep working: each one
 * still equal to what the reader saw goes from the slice's hash to the session's quarantine hash (field
 * `log:id@seconds`). Its log element stays as a deleted entry's does (readers skip it; retention pops it
 * uncounted), so no position moves and no cached copy needs a full refetch.
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, quarantine, [stats]. ARGV: 1 slice ('s' session,
 * 'u' user), 2 ttl seconds for the quarantine (0 = none), then id, payload pairs. Reply: the number moved.
 */
export const LOG_QUARANTINE = script('log_quarantine', 8, statsLua(9) + `
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local h = ARGV[1] == 'u' and KEYS[4] or KEYS[3]
local t = redis.call('TIME')
local moved = 0
for i = 3, #ARGV, 2 do
  local cur = redis.call('HGET', h, ARGV[i])
  if cur and cur == ARGV[i + 1] then
    redis.call('HSET', KEYS[8], 'log:' .. ARGV[i] .. '@' .. t[1], cur)
    redis.call('HDEL', h, ARGV[i])
    moved = moved + 1
  end
end
if moved > 0 then
  if tonumber(ARGV[2]) > 0 then redis.call('EXPIRE', KEYS[8], tonumber(ARGV[2])) end
  restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
end
return moved
`);

/**
 * `logbook.maxEntries` over a user's whole scope (all their sessions), after a commit added entries to
 * one session's slice: index the new entries, then take the oldest past the cap out of the index and
 * name them for deletion (TRIM, per session). Refused, like LINK, for a write fenced before a user
 * erase (its session is being erased; the index must not name it again).
 * KEYS: the user's entry index, the user's tombstone. ARGV: 1 max entries, 2 the user's erase time the
 * writer saw ('' = none), 3 the writer's clock when it accepted the turn ('' = unfenced), then
 * (time, "session id") pairs. Reply: {"session id", ...} the entries to delete.
 */
export const USER_CAP = script('user_cap', 2, `
local gone = tonumber(redis.call('GET', KEYS[2]) or '0')
if (ARGV[2] ~= '' and gone > tonumber(ARGV[2])) or (ARGV[3] ~= '' and gone >= tonumber(ARGV[3])) then return {} end
for i = 4, #ARGV, 2 do redis.call('ZADD', KEYS[1], tonumber(ARGV[i]), ARGV[i + 1]) end
local over = redis.call('ZCARD', KEYS[1]) - tonumber(ARGV[1])
if over <= 0 then return {} end
local out = {}
local popped = redis.call('ZPOPMIN', KEYS[1], over)
for i = 1, #popped, 2 do out[#out + 1] = popped[i] end
return out
`);

/**
 * Delete user-scope logbook entries of one session by id (the user's cap, USER_CAP). The oldest are
 * normally at the head of the session's user log: those leave as retention's do (popped, the head
 * moved on, so readers drop them without a full fetch); any other is deleted with its log element and
 * the slice's epoch moved (readers fetch it again in full), as LOG_DELETE does.
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, [stats]. ARGV: 1 new epoch, then ids.
 * Reply: number deleted.
 */
export const TRIM = script('trim', 7, statsLua(8) + `
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local want, left = {}, 0
for i = 2, #ARGV do
  want[ARGV[i]] = true
  left = left + 1
end
local n, popped = 0, 0
while left > 0 do
  local e = redis.call('LINDEX', KEYS[6], 0)
  if not e then break end
  local id = string.match(e, '^%-?%d+:(.*)$') or e
  if want[id] then
    want[id] = nil
    left = left - 1
    n = n + redis.call('HDEL', KEYS[4], id)
  elseif redis.call('HEXISTS', KEYS[4], id) == 1 then
    break
  end
  redis.call('LPOP', KEYS[6])
  popped = popped + 1
end
if left > 0 then
  local moved = false
  for _, e in ipairs(redis.call('LRANGE', KEYS[6], 0, -1)) do
    local id = string.match(e, '^%-?%d+:(.*)$') or e
    if want[id] then
      n = n + redis.call('HDEL', KEYS[4], id)
      redis.call('LREM', KEYS[6], 1, e)
      moved = true
    end
  end
  if moved and redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HSET', KEYS[1], 'au', ARGV[1]) end
end
if popped > 0 and redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HINCRBY', KEYS[1], 'auh', popped) end
restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
return n
`);
