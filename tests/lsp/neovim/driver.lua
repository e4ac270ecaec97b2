-- Drives Neovim 0.7's built-in LSP client against `noisewise server --stdio`: opens a flagged file, waits for the
-- diagnostics, requests the code actions for the first finding, applies the preferred quick fix and waits for the
-- finding to disappear. Writes what it saw as JSON to $NW_OUT and exits 0, or exits non-zero with the reason.
vim.g.loaded_python3_provider = 0

local root = os.getenv('NW_ROOT')
local file = os.getenv('NW_FILE')
local out = os.getenv('NW_OUT')
local cmd = { os.getenv('NW_NODE'), os.getenv('NW_BIN'), 'server', '--stdio' }
local report = { steps = {} }

local function finish(code, reason)
  report.reason = reason
  local handle = io.open(out, 'w')
  handle:write(vim.fn.json_encode(report))
  handle:close()
  vim.cmd('cquit ' .. code)
end

local function step(name)
  table.insert(report.steps, name)
end

local ok, err = pcall(function()
  vim.cmd('edit ' .. vim.fn.fnameescape(file))
  local bufnr = vim.api.nvim_get_current_buf()
  local client_id = vim.lsp.start_client({ name = 'noisewise', cmd = cmd, root_dir = root })
  if not client_id then
    return finish(3, 'the client did not start')
  end
  vim.lsp.buf_attach_client(bufnr, client_id)
  step('attached')

  -- Neovim keeps diagnostics with byte columns; the LSP range is rebuilt in UTF-16 units from the buffer line.
  local function utf16(lnum, col)
    local line = vim.api.nvim_buf_get_lines(bufnr, lnum, lnum + 1, false)[1] or ''
    return { line = lnum, character = vim.str_utfindex(line, math.min(col, #line)) }
  end

  local function findings()
    local list = {}
    for _, d in ipairs(vim.diagnostic.get(bufnr)) do
      local lsp = d.user_data and d.user_data.lsp or {}
      local code = lsp.code or d.code
      if d.source == 'noisewise' and code == 'unconstrained-std' then
        table.insert(list, {
          code = code,
          message = d.message,
          source = d.source,
          severity = d.severity,
          range = { start = utf16(d.lnum, d.col), ['end'] = utf16(d.end_lnum, d.end_col) },
        })
      end
    end
    return list
  end

  if not vim.wait(20000, function() return #findings() > 0 end, 20) then
    return finish(4, 'no diagnostics arrived')
  end
  local first = findings()
  report.before = #first
  report.range = first[1].range
  report.code = first[1].code
  report.source = 'noisewise'
  step('diagnostics')

  local params = {
    textDocument = { uri = vim.uri_from_bufnr(bufnr) },
    range = first[1].range,
    context = { diagnostics = { first[1] } },
  }
  local responses, request_error = vim.lsp.buf_request_sync(bufnr, 'textDocument/codeAction', params, 10000)
  if request_error then
    return finish(8, 'code action request failed: ' .. tostring(request_error))
  end
  local preferred
  report.titles = {}
  for _, response in pairs(responses or {}) do
    if response.err then
      return finish(9, 'code action error: ' .. vim.inspect(response.err))
    end
    for _, action in ipairs(response.result or {}) do
      table.insert(report.titles, action.title)
      if action.isPreferred then
        preferred = action
      end
    end
  end
  if not preferred then
    return finish(5, 'no preferred quick fix')
  end
  step('code actions')

  local client = vim.lsp.get_client_by_id(client_id)
  vim.lsp.util.apply_workspace_edit(preferred.edit, client.offset_encoding)
  step('applied')

  if not vim.wait(20000, function() return #findings() == 0 end, 20) then
    return finish(6, 'the finding did not go away')
  end
  report.after = #findings()
  report.text = table.concat(vim.api.nvim_buf_get_lines(bufnr, 0, -1, false), '\n')
  step('cleared')
  vim.lsp.stop_client(client_id)
  finish(0, 'ok')
end)

if not ok then
  finish(7, tostring(err))
end
