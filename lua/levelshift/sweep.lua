--- levelshift.sweep: the Lua driver of sweeps (ls.sweep, sw:plot).
-- The numbers, the journal and the shards are in C (csrc/core/sweep.c); this
-- file adds the file options (out=, plot=), the program's --shard/--merge
-- (ls._run, set by the levelshift program) and plots drawn by gnuplot.
local io, os, string, table, math = io, os, string, table, math
local type, error, pairs, ipairs, tostring, setmetatable = type, error, pairs, ipairs, tostring, setmetatable

return function(ls, core)
  local methods = core._sweep_methods
  local labels = setmetatable({}, { __mode = "k" })

  local function shq(s) return "'" .. s:gsub("'", "'\\''") .. "'" end
  local function gq(s) return "'" .. tostring(s):gsub("'", "''") .. "'" end

  local function parse_shard(v)
    if type(v) == "string" then
      local k, n = v:match("^(%d+)/(%d+)$")
      if not k then error("sweep: shard must be \"k/n\" (e.g. \"2/8\"), got '" .. v .. "'", 3) end
      return math.tointeger(tonumber(k)), math.tointeger(tonumber(n))
    elseif type(v) == "table" then
      return math.tointeger(v[1]), math.tointeger(v[2])
    end
    error("sweep: shard must be \"k/n\" or {k, n}, got " .. type(v), 3)
  end

  --- ls.sweep{H0=, V= | H=function(p) -> op, from=, to=, steps=, count=,
  -- threads=, series=, out=, plot=, shard=, merge=, progress=, param=,
  -- param_unit=, energy_unit=, method = "auto"|"dense"|"band"|"krylov"}
  function ls.sweep(t)
    if type(t) ~= "table" then
      error("bad argument #1 to 'sweep' (table expected, got " .. type(t) .. ")", 2)
    end
    local o = {}
    for k, v in pairs(t) do o[k] = v end
    local out, plot = o.out, o.plot
    o.out, o.plot = nil, nil
    if out ~= nil and (type(out) ~= "string" or out == "") then
      error("bad argument #1 to 'sweep' ('out' must be a file path, got " .. type(out) .. ")", 2)
    end
    if plot ~= nil and (type(plot) ~= "string" or not (plot:match("%.svg$") or plot:match("%.png$"))) then
      error("bad argument #1 to 'sweep' ('plot' must be a path ending in .svg or .png)", 2)
    end
    local run = ls._run or {}
    local program_shard = false
    if o.shard ~= nil then
      o.shard, o.shards = parse_shard(o.shard)
    elseif run.shards then
      o.shard, o.shards = run.shard, run.shards
      program_shard = true
    end
    if run.merge and o.merge == nil then o.merge = true end
    if (o.shards or o.merge) and not out then
      error("bad argument #1 to 'sweep' (" .. (o.shards and "a shard" or "a merge")
        .. " needs 'out': the part files are named after it)", 2)
    end
    o.journal = out
    local ok, sw = pcall(function() return core.sweep(o) end)
    if not ok then
      if type(sw) == "string" then sw = sw:gsub("^[^\n]-sweep%.lua:%d+: ", "") end
      error(sw, 2)
    end
    labels[sw] = { param = t.param or "p", param_unit = t.param_unit, energy_unit = t.energy_unit }
    if sw.partial then
      if program_shard then
        error(setmetatable({ levelshift_shard_done = true,
          message = string.format("shard %d/%d of %s: %d points in %s.part.%d-of-%d; "
            .. "when all shards are done, join them with the same command and --merge",
            o.shard, o.shards, out, sw.done, out, o.shard, o.shards) },
          { __tostring = function(e) return e.message end }), 0)
      end
      return sw
    end
    if out then sw:write(out) end
    if plot then sw:plot(plot) end
    if out then sw:_remove_journals() end
    return sw
  end

  --- sw:write(path): CSV from the core; a path ending in .json gets JSON,
  -- encoded by dkjson (Debian package lua-dkjson) with every number written
  -- as %.17g (dkjson's own tostring keeps 14 digits, which does not give back
  -- every double), keys in a fixed order (same bytes on every run), and
  -- written atomically by the core (path.tmp.PID, fsync, rename).
  local core_write = methods.write
  local num_mt = { __tojson = function(self)
    local x = self[1]
    if x ~= x or x == math.huge or x == -math.huge then return "null" end
    return string.format("%.17g", x)
  end }
  local function nums(t)
    local out = {}
    for i, x in ipairs(t) do out[i] = setmetatable({ x }, num_mt) end
    return out
  end
  local KEYS = { "about", "param", "p", "levels", "series_order", "series", "crossings", "at", "gap", "kind" }
  function methods.write(sw, path)
    if type(path) ~= "string" or not path:match("%.json$") then return core_write(sw, path) end
    if sw.partial then error("sweep:write: a shard has only part of the points: merge the parts first", 2) end
    local ok, dkjson = pcall(require, "dkjson")
    if not ok then
      error("sweep:write: JSON needs the Debian package lua-dkjson (apt-get install lua-dkjson)", 2)
    end
    local lab = labels[sw] or { param = "p" }
    local doc = { about = sw:_about(), param = lab.param, p = nums(sw.p), levels = {}, crossings = {} }
    for a = 1, sw.count do doc.levels[a] = nums(sw:level(a)) end
    if sw.series_order > 0 then
      doc.series_order = sw.series_order
      doc.series = {}
      for a = 1, sw.count do doc.series[a] = nums(sw:series(a)) end
    end
    for i, c in ipairs(sw:crossings()) do
      doc.crossings[i] = { at = setmetatable({ c.at }, num_mt), gap = setmetatable({ c.gap }, num_mt),
        levels = { c.levels[1], c.levels[2] }, kind = c.kind }
    end
    local text = dkjson.encode(doc, { indent = true, keyorder = KEYS })
    local wok, err = pcall(core._write_file, path, text .. "\n")
    if not wok then error("sweep:" .. tostring(err), 2) end
  end

  local function have_gnuplot()
    if not os or not os.execute then return false end -- a sandboxed host
    local ok = os.execute("command -v gnuplot >/dev/null 2>&1")
    return ok == true or ok == 0
  end
  ls.have_gnuplot = have_gnuplot

  --- sw:plot(path [, {title=}]): level diagram as SVG or PNG (by the
  -- extension) drawn by gnuplot: exact curves solid, series curves dashed,
  -- crossings marked; written to path.tmp, then renamed.
  function methods.plot(sw, path, opts)
    if type(path) ~= "string" or not (path:match("%.svg$") or path:match("%.png$")) then
      error("bad argument #1 to 'plot' (a path ending in .svg or .png expected)", 2)
    end
    if opts ~= nil and type(opts) ~= "table" then
      error("bad argument #2 to 'plot' (table of options expected, got " .. type(opts) .. ")", 2)
    end
    opts = opts or {}
    -- gnuplot reads one command a line: a newline (or any control
    -- character) in a quoted string would end the command and start another
    -- (and gnuplot's system() runs a shell), so none may reach the script
    local lab0 = labels[sw] or {}
    for _, v in ipairs { { "the path", path }, { "option 'title'", opts.title }, { "the label 'param'", lab0.param },
      { "the label 'param_unit'", lab0.param_unit }, { "the label 'energy_unit'", lab0.energy_unit } } do
      if v[2] ~= nil and tostring(v[2]):find("[%z\1-\31\127]") then
        error("bad argument #" .. (v[1] == "the path" and 1 or 2) .. " to 'plot' (" .. v[1]
          .. " contains a control character, which would break the gnuplot script)", 2)
      end
    end
    if not io or not os then error("sweep:plot: writing files is disabled in this sandboxed host", 2) end
    if not have_gnuplot() then
      error("sweep:plot: gnuplot is not installed; install the Debian package gnuplot-nox "
        .. "(apt-get install gnuplot-nox) to draw plots", 2)
    end
    if sw.partial then error("sweep:plot: a shard has only part of the points: merge the parts first", 2) end
    local lab = labels[sw] or { param = "p" }
    local p, count = sw.p, sw.count
    local order = sw.series_order
    local E, S = {}, {}
    local lo, hi = math.huge, -math.huge
    for a = 1, count do
      E[a] = sw:level(a)
      if order > 0 then S[a] = sw:series(a) end
      for _, e in ipairs(E[a]) do
        if e < lo then lo = e end
        if e > hi then hi = e end
      end
    end
    local pad = (hi - lo) * 0.08
    if pad == 0 then pad = 1 end
    local data = path .. ".dat.tmp"
    -- every temporary file is checked: a full disk or an unwritable folder
    -- is an error naming the path, and the earlier plot stays as it was
    local function wfail(what, err)
      os.remove(data)
      error("sweep:plot: cannot write '" .. path .. "' (" .. what .. ": " .. tostring(err) .. ")", 3)
    end
    local f, ferr = io.open(data, "w")
    if not f then wfail("opening " .. data, ferr) end
    for k = 1, #p do
      local row = { string.format("%.17g", p[k]) }
      for a = 1, count do row[#row + 1] = string.format("%.17g", E[a][k]) end
      if order > 0 then
        for a = 1, count do row[#row + 1] = string.format("%.17g", S[a][k]) end
      end
      f:write(table.concat(row, " "), "\n")
    end
    f:write("\n\n")
    -- crossings: marked midway between the two levels, interpolated at the crossing
    local cross = sw:crossings()
    for _, c in ipairs(cross) do
      local k = 1
      while k < #p - 1 and (p[k + 1] - c.at) * (p[#p] - p[1]) < 0 do k = k + 1 end
      local tt = (c.at - p[k]) / (p[k + 1] - p[k])
      local e = 0
      for _, lv in ipairs{E[c.levels[1]], E[c.levels[2]]} do e = e + 0.5 * (lv[k] + tt * (lv[k + 1] - lv[k])) end
      f:write(string.format("%.17g %.17g\n", c.at, e))
    end
    if #cross == 0 then f:write(string.format("%.17g %.17g\n", 0 / 0, 0 / 0)) end
    local wok, werr = f:flush()
    local cok, cerr = f:close()
    if not wok or not cok then wfail("writing " .. data, werr or cerr) end
    local xl = lab.param .. (lab.param_unit and (" (" .. lab.param_unit .. ")") or "")
    local yl = "energy" .. (lab.energy_unit and (" (" .. lab.energy_unit .. ")") or "")
    local tmpimg = path .. ".tmp"
    local g = {}
    if path:match("%.svg$") then
      g[#g + 1] = "set terminal svg size 900,620 dynamic noenhanced font 'sans,13'"
    else
      g[#g + 1] = "set terminal pngcairo size 900,620 noenhanced font 'sans,11'"
    end
    g[#g + 1] = "set output " .. gq(tmpimg)
    g[#g + 1] = "set xlabel " .. gq(xl)
    g[#g + 1] = "set ylabel " .. gq(yl)
    if opts.title then g[#g + 1] = "set title " .. gq(opts.title) end
    g[#g + 1] = string.format("set yrange [%.17g:%.17g]", lo - pad, hi + pad)
    g[#g + 1] = string.format("set xrange [%.17g:%.17g]", math.min(p[1], p[#p]), math.max(p[1], p[#p]))
    g[#g + 1] = "set key outside right top"
    g[#g + 1] = "set grid"
    local parts = {}
    for a = 1, count do
      parts[#parts + 1] = string.format("%s index 0 using 1:%d with lines lc rgb '#1f4e9c' lw 1.6 dt 1 %s",
        a == 1 and gq(data) or "''", a + 1, a == 1 and "title 'exact'" or "notitle")
    end
    if order > 0 then
      for a = 1, count do
        parts[#parts + 1] = string.format("'' index 0 using 1:%d with lines lc rgb '#c0392b' lw 1.4 dt 2 %s",
          count + a + 1, a == 1 and ("title " .. gq("series, order " .. order)) or "notitle")
      end
    end
    parts[#parts + 1] = "'' index 1 using 1:2 with points pt 6 ps 1.6 lc rgb 'black' title 'crossings'"
    g[#g + 1] = "plot " .. table.concat(parts, ", \\\n  ")
    g[#g + 1] = "unset output"
    local script = path .. ".gp.tmp"
    f, ferr = io.open(script, "w")
    if not f then wfail("opening " .. script, ferr) end
    f:write(table.concat(g, "\n"), "\n")
    wok, werr = f:flush()
    cok, cerr = f:close()
    if not wok or not cok then os.remove(script) wfail("writing " .. script, werr or cerr) end
    local errf = path .. ".err.tmp"
    local ok = os.execute("gnuplot " .. shq(script) .. " >" .. shq(errf) .. " 2>&1")
    local ef = io.open(errf)
    local msg = ef and ef:read("a") or ""
    if ef then ef:close() end
    os.remove(errf)
    os.remove(script)
    os.remove(data)
    if not (ok == true or ok == 0) then
      os.remove(tmpimg)
      error("sweep:plot: gnuplot failed for '" .. path .. "': " .. msg, 2)
    end
    local rok, rerr = os.rename(tmpimg, path)
    if not rok then
      os.remove(tmpimg)
      error("sweep:plot: cannot write '" .. path .. "': " .. tostring(rerr), 2)
    end
    return path
  end
end
