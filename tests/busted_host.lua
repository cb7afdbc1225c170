-- Runs one busted spec inside the `levelshift` program instead of the stock
-- lua5.4, so a sanitizer build (LVS_SANITIZE=ON) checks the binding without
-- preloading the ASan runtime into an uninstrumented interpreter, and the
-- programs the specs start (sh, gnuplot) run uninstrumented and unreported.
--   levelshift tests/busted_host.lua spec=tests/lua/matrix_spec.lua
local p = params or {}
if type(p.spec) ~= "string" then error("busted_host: give spec=PATH", 0) end
arg = { [0] = "busted", "--output=plainTerminal", p.spec }
require "busted.runner" ({ standalone = false })
