--- levelshift.spinterms (ls.spin_model): spin Hamiltonians from interaction
-- terms with full 3x3 tensors, on one product basis of electron and nuclear
-- spins. Each term is a bilinear form  sum_ij T_ij X_i Y_j  or a linear one
-- sum_i v_i X_i  of spin components (X, Y = Sx, Sy, Sz of one site), kept
-- under a group name so that ls.perturb and ls.sweep get H0 and V split as
-- asked:
--   local m = ls.spin_model()
--   local e = m:add_spin(1, "e")              -- returns the site number
--   local n = m:add_spin(1/2, "N")
--   m:zero_field(e, {axial = 2870, rhombic = 5, euler = {0, 30, 0}})
--   m:zeeman(e, {principal = {2.0, 2.0, 2.0}}, {0, 0, 100})   -- g tensor, field as mu B
--   m:hyperfine(e, n, {matrix = {{..}, {..}, {..}}})
--   local H0, V = m:split({"zero_field", "hyperfine"}, {"zeeman"})
-- A tensor is {principal = {t1, t2, t3}, euler = {alpha, beta, gamma}} (degrees)
-- or {matrix = {{...}, {...}, {...}}} (any real 3x3) or a number t (t times the
-- identity). Euler convention: z-y-z, active: T = R diag(t) R^T with
-- R = Rz(alpha) Ry(beta) Rz(gamma), R rotating the principal axes from the
-- molecular frame's x, y, z onto the tensor's axes (Rose, Elementary Theory
-- of Angular Momentum, 1957, section 4.1; the common convention of magnetic
-- resonance). Fields and distances are vectors {x, y, z} in the molecular frame.
-- Energies in one unit of your choice: the Zeeman field is given as the
-- energy per unit g (mu_B B, or mu_N B for a nucleus; ls.units converts tesla).
return function(ls)
  local M = {}
  M.__index = M

  local function fail(fname, msg) error(fname .. ": " .. msg, 3) end

  local function rot(euler, fname)
    local a, b, c = table.unpack(euler or { 0, 0, 0 })
    if type(a) ~= "number" or type(b) ~= "number" or type(c) ~= "number" then
      fail(fname, "euler must be three angles in degrees {alpha, beta, gamma}")
    end
    a, b, c = math.rad(a), math.rad(b), math.rad(c)
    local function rz(t) return { { math.cos(t), -math.sin(t), 0 }, { math.sin(t), math.cos(t), 0 }, { 0, 0, 1 } } end
    local function ry(t) return { { math.cos(t), 0, math.sin(t) }, { 0, 1, 0 }, { -math.sin(t), 0, math.cos(t) } } end
    local function mul(x, y)
      local z = {}
      for i = 1, 3 do
        z[i] = {}
        for j = 1, 3 do
          local s = 0
          for k = 1, 3 do s = s + x[i][k] * y[k][j] end
          z[i][j] = s
        end
      end
      return z
    end
    return mul(mul(rz(a), ry(b)), rz(c))
  end

  -- a coupling argument (number, principal values + Euler angles, or a
  -- matrix) as a 3x3 table
  local function coupling_matrix(t, fname)
    if type(t) == "number" then
      if t ~= t or math.abs(t) == math.huge then fail(fname, "the tensor is NaN or infinite") end
      return { { t, 0, 0 }, { 0, t, 0 }, { 0, 0, t } }
    end
    if type(t) ~= "table" then fail(fname, "a tensor is a number, {principal = {..}, euler = {..}} or {matrix = {..}}") end
    if t.matrix then
      local m = t.matrix
      for i = 1, 3 do
        if type(m[i]) ~= "table" then fail(fname, "matrix must be 3 rows of 3 numbers") end
        for j = 1, 3 do
          local v = m[i][j]
          if type(v) ~= "number" or v ~= v or math.abs(v) == math.huge then
            fail(fname, "matrix must be 3 rows of 3 finite numbers")
          end
        end
      end
      return m
    end
    local p = t.principal
    if type(p) ~= "table" or #p ~= 3 then fail(fname, "principal must be three values {t1, t2, t3}") end
    for i = 1, 3 do
      if type(p[i]) ~= "number" or p[i] ~= p[i] or math.abs(p[i]) == math.huge then
        fail(fname, "principal values must be finite numbers")
      end
    end
    local R = rot(t.euler, fname)
    local T = {}
    for i = 1, 3 do
      T[i] = {}
      for j = 1, 3 do
        local s = 0
        for k = 1, 3 do s = s + R[i][k] * p[k] * R[j][k] end
        T[i][j] = s
      end
    end
    return T
  end

  local function vector(v, fname, what)
    if type(v) ~= "table" or #v ~= 3 then fail(fname, what .. " must be a vector {x, y, z}") end
    for i = 1, 3 do
      if type(v[i]) ~= "number" or v[i] ~= v[i] or math.abs(v[i]) == math.huge then
        fail(fname, what .. " must hold three finite numbers")
      end
    end
    return v
  end

  --- ls.spin_model() -> an empty model; add spins, then terms
  function ls.spin_model()
    return setmetatable({ spins = {}, names = {}, terms = {} }, M)
  end

  function M:add_spin(S, name)
    if self.basis then fail("add_spin", "the basis is built: add every spin before the first term") end
    if type(S) ~= "number" or S <= 0 or 2 * S ~= math.floor(2 * S) then
      fail("add_spin", "the spin must be a positive multiple of 1/2")
    end
    self.spins[#self.spins + 1] = S
    self.names[#self.names + 1] = name or ("spin" .. #self.spins)
    return #self.spins
  end

  local function ops(self, site, fname)
    if not self.basis then
      if #self.spins == 0 then fail(fname, "add a spin first") end
      local sites = {}
      for k, S in ipairs(self.spins) do sites[k] = ls.spin(S) end
      self.basis = #sites == 1 and sites[1] or ls.product(table.unpack(sites))
    end
    if math.type(site) ~= "integer" or site < 1 or site > #self.spins then
      fail(fname, "site must be a spin number from 1 to " .. #self.spins)
    end
    local s = #self.spins == 1 and self.basis or self.basis:site(site)
    return { s.Sx, s.Sy, s.Sz }
  end

  local function add(self, group, op) -- keep op under its group
    self.terms[#self.terms + 1] = { group = group, op = op }
    return op
  end

  local function bilinear(X, T, Y)
    local H
    for i = 1, 3 do
      for j = 1, 3 do
        if T[i][j] ~= 0 then
          local t = T[i][j] * (X[i] * Y[j])
          H = H and H + t or t
        end
      end
    end
    return H
  end

  --- m:zeeman(site, gtensor, field [, group]): field . g . S, the field as mu B
  -- (energy per unit g) in the molecular frame
  function M:zeeman(site, g, field, group)
    local S = ops(self, site, "zeeman")
    local G, B = coupling_matrix(g, "zeeman"), vector(field, "zeeman", "field")
    local H
    for i = 1, 3 do
      for j = 1, 3 do
        local c = B[i] * G[i][j]
        if c ~= 0 then H = H and H + c * S[j] or c * S[j] end
      end
    end
    return add(self, group or "zeeman", H or 0 * S[3])
  end

  --- m:zero_field(site, {axial = D, rhombic = E, euler = {..}} or a tensor [, group]):
  -- S . T . S with T traceless (D (Sz^2 - S(S+1)/3) + E (Sx^2 - Sy^2) in the principal frame)
  function M:zero_field(site, t, group)
    local S = ops(self, site, "zero_field")
    local T
    if type(t) == "table" and (t.axial or t.rhombic) then
      local D, E = t.axial or 0, t.rhombic or 0
      T = coupling_matrix({ principal = { -D / 3 + E, -D / 3 - E, 2 * D / 3 }, euler = t.euler }, "zero_field")
    else
      T = coupling_matrix(t, "zero_field")
      local tr = (T[1][1] + T[2][2] + T[3][3]) / 3 -- only the traceless part splits levels
      T = { { T[1][1] - tr, T[1][2], T[1][3] }, { T[2][1], T[2][2] - tr, T[2][3] }, { T[3][1], T[3][2], T[3][3] - tr } }
    end
    return add(self, group or "zero_field", bilinear(S, T, S) or 0 * S[3])
  end

  --- m:hyperfine(electron, nucleus, tensor [, group]): S . A . I
  function M:hyperfine(a, b, t, group)
    local S, I = ops(self, a, "hyperfine"), ops(self, b, "hyperfine")
    if a == b then fail("hyperfine", "the electron and the nucleus must be two different sites") end
    return add(self, group or "hyperfine", bilinear(S, coupling_matrix(t, "hyperfine"), I) or 0 * S[3])
  end

  --- m:quadrupole(nucleus, {coupling = e^2 q Q, asymmetry = eta, euler = {..}} or a tensor [, group]):
  -- I . Q . I with Q = e^2qQ / (4 I (2I - 1)) diag(-(1 - eta), -(1 + eta), 2) (Abragam, The
  -- Principles of Nuclear Magnetism, 1961, chapter VI)
  function M:quadrupole(site, t, group)
    local I = ops(self, site, "quadrupole")
    local spin = self.spins[site]
    if spin < 1 then fail("quadrupole", "a quadrupole coupling needs a spin of 1 or more") end
    local T
    if type(t) == "table" and t.coupling then
      local eta, q = t.asymmetry or 0, t.coupling / (4 * spin * (2 * spin - 1))
      T = coupling_matrix({ principal = { -q * (1 - eta), -q * (1 + eta), 2 * q }, euler = t.euler }, "quadrupole")
    else
      T = coupling_matrix(t, "quadrupole")
    end
    return add(self, group or "quadrupole", bilinear(I, T, I) or 0 * I[3])
  end

  --- m:exchange(a, b, J or a tensor [, group]): S_a . J . S_b (a number: isotropic J S_a . S_b)
  function M:exchange(a, b, t, group)
    if a == b then fail("exchange", "two different sites are needed") end
    local Sa, Sb = ops(self, a, "exchange"), ops(self, b, "exchange")
    return add(self, group or "exchange", bilinear(Sa, coupling_matrix(t, "exchange"), Sb) or 0 * Sa[3])
  end

  --- m:dipolar(a, b, {strength = d, direction = {x, y, z}} [, group]): the point-dipole
  -- coupling d [S_a . S_b - 3 (S_a . n)(S_b . n)], n the unit vector from a to b, d =
  -- (mu0/4pi) g_a g_b mu_B^2 / r^3 in your energy unit
  function M:dipolar(a, b, t, group)
    if a == b then fail("dipolar", "two different sites are needed") end
    if type(t) ~= "table" or type(t.strength) ~= "number" then
      fail("dipolar", "give {strength = d, direction = {x, y, z}}")
    end
    local v = vector(t.direction, "dipolar", "direction")
    local r = math.sqrt(v[1] ^ 2 + v[2] ^ 2 + v[3] ^ 2)
    if r == 0 then fail("dipolar", "the direction must not be zero") end
    local n = { v[1] / r, v[2] / r, v[3] / r }
    local T = {}
    for i = 1, 3 do
      T[i] = {}
      for j = 1, 3 do T[i][j] = t.strength * ((i == j and 1 or 0) - 3 * n[i] * n[j]) end
    end
    local Sa, Sb = ops(self, a, "dipolar"), ops(self, b, "dipolar")
    return add(self, group or "dipolar", bilinear(Sa, T, Sb) or 0 * Sa[3])
  end

  --- m:split(h0_groups, v_groups) -> H0, V: the terms of the named groups summed;
  -- every group must be named once; an empty list gives a zero op
  function M:split(g0, g1)
    if not self.basis then fail("split", "add terms first") end
    local want = {}
    for _, list in ipairs { g0 or {}, g1 or {} } do
      if type(list) ~= "table" then fail("split", "give two lists of group names") end
    end
    for k, list in ipairs { g0 or {}, g1 or {} } do
      for _, g in ipairs(list) do
        if want[g] then fail("split", "group '" .. tostring(g) .. "' is named twice") end
        want[g] = k
      end
    end
    local seen, parts = {}, { nil, nil }
    for _, t in ipairs(self.terms) do
      seen[t.group] = true
      local k = want[t.group]
      if not k then fail("split", "group '" .. t.group .. "' is in neither list") end
      parts[k] = parts[k] and parts[k] + t.op or t.op
    end
    for g in pairs(want) do
      if not seen[g] then fail("split", "no term of group '" .. tostring(g) .. "'") end
    end
    local zero = 0 * self.terms[1].op
    return parts[1] or zero, parts[2] or zero
  end

  --- m:hamiltonian() -> the sum of every term
  function M:hamiltonian()
    if #self.terms == 0 then fail("hamiltonian", "add terms first") end
    local H
    for _, t in ipairs(self.terms) do H = H and H + t.op or t.op end
    return H
  end
end
