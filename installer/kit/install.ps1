# Install Tenure @VERSION@ from this offline kit (Windows). Nothing here reaches the network.
#
#   powershell -ExecutionPolicy Bypass -File install.ps1 [-Prefix DIR] [-Python PATH] [-NoShortcut]
#
# 1. checks the SHA-256 of every file in the kit (SHA256SUMS) and names any damaged one;
# 2. finds a Python the kit has wheels for (@PYTHONS@): the py launcher, then python;
# 3. creates a virtual environment in PREFIX\venv and installs Tenure with pip --no-index
#    from wheels\ only;
# 4. adds a Start-menu shortcut "Tenure" (the window, without a console).
#
# Default PREFIX: %LOCALAPPDATA%\Programs\Tenure. An existing installation in PREFIX is
# replaced; workbooks and settings live elsewhere and are kept.
# Exit codes: 0 installed; 2 not installed (damaged kit, no suitable Python).

param(
    [string]$Prefix = (Join-Path $env:LOCALAPPDATA "Programs\Tenure"),
    [string]$Python = "",
    [switch]$NoShortcut
)

$ErrorActionPreference = "Stop"
$Kit = $PSScriptRoot

function Fail([string]$Message) {
    [Console]::Error.WriteLine("error: $Message")
    exit 2
}

# --- 1. checksums, before anything else is read or run -------------------------------------
$sums = Join-Path $Kit "SHA256SUMS"
if (-not (Test-Path -LiteralPath $sums -PathType Leaf)) {
    Fail "kit: SHA256SUMS is missing; copy the whole kit again"
}
$bad = @()
$count = 0
foreach ($line in Get-Content -LiteralPath $sums) {
    if (-not $line.Trim()) { continue }
    $cut = $line.IndexOf("  ")
    $want = $line.Substring(0, $cut).ToLowerInvariant()
    $name = $line.Substring($cut + 2)
    $count += 1
    $path = Join-Path $Kit ($name -replace "/", "\")
    if (-not (Test-Path -LiteralPath $path -PathType Leaf)) {
        $bad += "  missing: $name"
    } elseif ((Get-FileHash -Algorithm SHA256 -LiteralPath $path).Hash.ToLowerInvariant() -ne $want) {
        $bad += "  damaged: $name"
    }
}
if ($bad.Count -gt 0) {
    [Console]::Error.WriteLine("error: kit: these files are damaged or missing (copy the kit again; nothing was installed):")
    $bad | ForEach-Object { [Console]::Error.WriteLine($_) }
    exit 2
}
Write-Host "Checked $count files against SHA256SUMS: all intact."

$info = @{}
foreach ($line in Get-Content -LiteralPath (Join-Path $Kit "kit-info.txt")) {
    $cut = $line.IndexOf("=")
    if ($cut -gt 0) { $info[$line.Substring(0, $cut)] = $line.Substring($cut + 1) }
}
$Version = $info["version"]
$Pythons = $info["pythons"].Split(" ")
if (-not ($info["platforms"].Split(" ") -contains "windows-x86_64")) {
    Fail "platform: this kit holds wheels for $($info['platforms']), not windows-x86_64"
}

# --- 2. Python --------------------------------------------------------------------------------
function Version-Of([string[]]$Command) {
    try {
        $exe = $Command[0]
        $rest = @()
        if ($Command.Count -gt 1) { $rest = $Command[1..($Command.Count - 1)] }
        $out = & $exe @rest -c "import sys; print('%d.%d' % sys.version_info[:2]); print(sys.executable)" 2>$null
        if ($LASTEXITCODE -eq 0 -and $out.Count -ge 2) { return $out }
    } catch { }
    return $null
}
$found = $null
if ($Python) {
    $found = Version-Of @($Python)
    if (-not $found) { Fail "python: $Python does not run" }
} else {
    foreach ($v in ($Pythons | Sort-Object -Descending)) {
        if (Get-Command py -ErrorAction SilentlyContinue) { $found = Version-Of @("py", "-$v") }
        if ($found) { break }
    }
    if (-not $found) { $found = Version-Of @("python") }
    if (-not $found) { Fail "python: no Python found; install Python $($info['pythons']) (python.org installer) or name one with -Python" }
}
$PyVersion = $found[0]
$PyExe = $found[1]
if (-not ($Pythons -contains $PyVersion)) {
    Fail "python: $PyExe is Python $PyVersion; this kit holds wheels for Python $($info['pythons'])"
}

# --- 3. virtual environment and packages, from wheels\ only -----------------------------------
New-Item -ItemType Directory -Force -Path $Prefix | Out-Null
$Prefix = (Resolve-Path -LiteralPath $Prefix).Path
Write-Host "Installing Tenure $Version with Python $PyVersion ($PyExe) into $Prefix ..."
$Venv = Join-Path $Prefix "venv"
if (Test-Path -LiteralPath $Venv) { Remove-Item -Recurse -Force -LiteralPath $Venv }
& $PyExe -m venv --without-pip $Venv
if ($LASTEXITCODE -ne 0) { Fail "python: cannot create a virtual environment with $PyExe" }
$VenvPython = Join-Path $Venv "Scripts\python.exe"
$PipWheel = Get-ChildItem -Path (Join-Path $Kit "wheels") -Filter "pip-*.whl" | Sort-Object Name | Select-Object -Last 1
if (-not $PipWheel) { Fail "kit: wheels\pip-*.whl is missing" }
# No pip configuration file, environment variable or cache is read or written: only wheels\.
$env:PIP_CONFIG_FILE = "nul"
& $VenvPython (Join-Path $PipWheel.FullName "pip") install --isolated --no-index `
    --find-links (Join-Path $Kit "wheels") --no-cache-dir --disable-pip-version-check -q `
    pip "tenure==$Version"
if ($LASTEXITCODE -ne 0) { Fail "pip: installing from the kit failed (see above); nothing was taken from the network" }
Remove-Item Env:\PIP_CONFIG_FILE
$Tenure = Join-Path $Venv "Scripts\tenure.exe"
& $Tenure --help | Out-Null
if ($LASTEXITCODE -ne 0) { Fail "tenure: the installed command does not start" }
Copy-Item -Force -LiteralPath (Join-Path $Kit "tenure.ico") -Destination (Join-Path $Prefix "tenure.ico")

# --- 4. Start-menu shortcut -------------------------------------------------------------------
if (-not $NoShortcut) {
    $programs = [Environment]::GetFolderPath("Programs")
    $shell = New-Object -ComObject WScript.Shell
    $link = $shell.CreateShortcut((Join-Path $programs "Tenure.lnk"))
    $link.TargetPath = Join-Path $Venv "Scripts\pythonw.exe"
    # -P: the working folder (Documents) is not put on the module path, so a folder there
    # named like one of Tenure's packages cannot stand in for it
    $link.Arguments = "-P -m core.cli"
    $link.WorkingDirectory = [Environment]::GetFolderPath("MyDocuments")
    $link.IconLocation = Join-Path $Prefix "tenure.ico"
    $link.Description = "Keep-or-replace decisions for production equipment"
    $link.Save()
    Write-Host "Start-menu shortcut: $(Join-Path $programs 'Tenure.lnk')"
}
Write-Host "Tenure $Version is installed. Command line: $Tenure"
