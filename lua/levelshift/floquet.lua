--- levelshift.floquet (ls.floquet): a periodic drive H(t) = H0 + V cos(omega t)
-- in the extended (Floquet-Sambe) space: blocks m = -M..M, H0 + m omega on
-- block m and V/2 between neighbouring blocks (Shirley, Phys. Rev. 138, B979
-- (1965); Sambe, Phys. Rev. A 7, 2203 (1973)). The quasienergies are the
-- eigenvalues of that operator modulo omega; M truncates the photon number.
--   local F = ls.floquet{H0 = H0, V = V, omega = w, harmonics = M}
--   F.H, F.H0, F.V        the extended operator, its diagonal part and the drive part
--   F:quasienergies([count])  -> list of {value =, level =, block =, weight =}
--                           folded into [-omega/2, omega/2), each with its
--                           dominant unperturbed level and block
--   F:shift(level [, order]) -> the series of `level` (block 0) in the drive
--                           amplitude: ls.perturb on H0 + m omega and the
--                           couplings V/2 (nearly degenerate blocks, a
--                           resonance, are taken together as model spaces)
--   F:convergence([count])  -> the largest change of the lowest quasienergies
--                           of block 0 when M grows by one
-- The second order of F:shift is the ac Stark shift -alpha(omega) F^2/4 of the
-- level for a drive V = F D (the dynamic polarizability of ls.polarizability).
return function(ls)
  local function fail(msg, lvl) error("floquet: " .. msg, lvl or 3) end

  -- the extended operator, its diagonal (photon blocks) and its drive part
  local function extended(H0, V, w, M)
    local id = ls.basis(H0:dim()):identity()
    local full, diag, off = {}, {}, {}
    for a = -M, M do
      local rf, rd, ro = {}, {}, {}
      for b = -M, M do
        local d = (a == b) and ((a ~= 0) and (H0 + (a * w) * id) or H0) or 0
        local o = (math.abs(a - b) == 1) and (0.5 * V) or 0
        rf[#rf + 1], rd[#rd + 1], ro[#ro + 1] = (a == b) and d or o, d, o
      end
      full[#full + 1], diag[#diag + 1], off[#off + 1] = rf, rd, ro
    end
    return ls.blocks(full), ls.blocks(diag), ls.blocks(off)
  end

  --- ls.light_shift(alpha, {intensity = I [, intensity_unit = "W/cm^2"], alpha_unit = "au"|"SI",
  -- energy_unit = "MHz"}) -> the shift -alpha I / (2 c eps_0) of a level in a
  -- linearly polarized field of intensity I (I = c eps_0 F^2 / 2, shift -alpha F^2/4),
  -- alpha in atomic units (e^2 a0^2 / E_h = 4 pi eps_0 a0^3) or SI (C m^2 / V);
  -- constants from ls.units (CODATA 2018)
  function ls.light_shift(alpha, o)
    if type(alpha) ~= "number" or alpha ~= alpha or math.abs(alpha) == math.huge then
      error("light_shift: alpha must be a finite number", 2)
    end
    if type(o) ~= "table" or type(o.intensity) ~= "number" or not (o.intensity >= 0) then
      error("light_shift: give {intensity = I >= 0, ...}", 2)
    end
    local u = ls.units
    local iu = o.intensity_unit or "W/cm^2"
    local I = o.intensity * (iu == "W/cm^2" and 1e4 or iu == "W/m^2" and 1 or iu == "mW/cm^2" and 10 or
      error("light_shift: intensity_unit must be W/cm^2, mW/cm^2 or W/m^2", 2))
    local au = o.alpha_unit or "au"
    local aSI
    if au == "au" then aSI = alpha * 4 * math.pi * u.eps_0 * u.a0 ^ 3
    elseif au == "SI" then aSI = alpha
    else error("light_shift: alpha_unit must be \"au\" or \"SI\"", 2) end
    local J = -aSI * I / (2 * u.c * u.eps_0)
    return u.convert(J, "J", o.energy_unit or "MHz")
  end

  local F = {}
  F.__index = F

  function ls.floquet(spec)
    if type(spec) ~= "table" then fail("give a table {H0 =, V =, omega =, harmonics =}") end
    local H0, V, w, M = spec.H0, spec.V, spec.omega, spec.harmonics or 8
    local ok, r, c = pcall(function() return H0:dim() end)
    if not ok or r ~= c then fail("H0 must be a square op") end
    local ok2, vr, vc = pcall(function() return V:dim() end)
    if not ok2 or vr ~= r or vc ~= c then fail("V must be an op of H0's size") end
    if type(w) ~= "number" or not (w > 0) or w == math.huge then fail("omega must be a positive number") end
    if math.type(M) ~= "integer" or M < 1 or M > 200 then fail("harmonics must be an integer from 1 to 200") end
    local H, D, O = extended(H0, V, w, M)
    return setmetatable({ H = H, H0 = D, V = O, omega = w, harmonics = M, n = r, base = { H0 = H0, V = V } }, F)
  end

  local function fold(e, w) return e - w * math.floor(e / w + 0.5) end

  function F:quasienergies(count)
    local N = self.n * (2 * self.harmonics + 1)
    count = count or self.n
    if math.type(count) ~= "integer" or count < 1 or count > self.n then
      fail("quasienergies: count must be an integer from 1 to " .. self.n)
    end
    local E, U = ls.eigen(self.H)
    local n, M, out, taken = self.n, self.harmonics, {}, {}
    -- for each unperturbed level of block 0, the eigenvector with the most weight there
    for k = 1, n do
      local best, bw = nil, -1
      for j = 1, N do
        if not taken[j] then
          local re, im = U:get((M) * n + k, j)
          local wgt = re * re + im * im
          if wgt > bw then best, bw = j, wgt end
        end
      end
      taken[best] = true
      out[#out + 1] = { value = fold(E[best], self.omega), level = k, block = 0, weight = bw, raw = E[best] }
    end
    table.sort(out, function(a, b) return a.level < b.level end)
    local res = {}
    for i = 1, count do res[i] = out[i] end
    return res
  end

  function F:shift(level, order)
    if math.type(level) ~= "integer" or level < 1 or level > self.n then
      fail("shift: level must be an integer from 1 to " .. self.n)
    end
    order = order or 2
    -- the level's index among the extended space's levels as ls.perturb
    -- numbers them (ascending; found from F.H0's own eigenvalues, not from
    -- E0 + m omega recomputed here, which can round a near-tie the other way)
    local E0 = ls.eigen(self.base.H0, { vectors = false })
    local target = E0[level]
    local Eall = ls.eigen(self.H0, { vectors = false })
    local idx
    for i, e in ipairs(Eall) do
      if math.abs(e - target) <= 1e-12 * math.max(1, math.abs(target)) then
        idx = i
        break
      end
    end
    return ls.perturb(self.H0, self.V, { order = order, levels = { idx } }), idx
  end

  function F:convergence(count)
    local G = ls.floquet { H0 = self.base.H0, V = self.base.V, omega = self.omega, harmonics = self.harmonics + 1 }
    local a, b = self:quasienergies(count), G:quasienergies(count)
    local worst = 0
    for i = 1, #a do
      local d = math.abs(fold(a[i].value - b[i].value, self.omega))
      if d > worst then worst = d end
    end
    return worst
  end
end
