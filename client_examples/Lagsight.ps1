<#
.SYNOPSIS
  Call the Lagsight service from PowerShell and print the verdict and the lags outside the band.

.EXAMPLE
  ./Lagsight.ps1 -Mode single -Payload demo_payloads/bakery_daily_residuals.json
  ./Lagsight.ps1 -Mode batch -Payload demo_payloads/retail_weekly_batch_500.json -BaseUrl http://127.0.0.1:8000

.NOTES
  Works in PowerShell 7 and Windows PowerShell 5.1. Defaults come from the environment: LAGSIGHT_URL
  (http://127.0.0.1:8000), LAGSIGHT_TIMEOUT in seconds (30) and LAGSIGHT_TOKEN (a bearer token, only where the
  deployment requires one). Exit codes: 0 answered, 2 the service refused the request (problem details printed),
  3 no answer.
#>
[CmdletBinding()]
param(
    [Parameter(Mandatory = $true)][ValidateSet('single', 'batch')][string]$Mode,
    [Parameter(Mandatory = $true)][string]$Payload,
    [string]$BaseUrl = $(if ($env:LAGSIGHT_URL) { $env:LAGSIGHT_URL } else { 'http://127.0.0.1:8000' }),
    [int]$TimeoutSec = $(if ($env:LAGSIGHT_TIMEOUT) { [int]$env:LAGSIGHT_TIMEOUT } else { 30 }),
    [string]$Token = $env:LAGSIGHT_TOKEN
)

Set-StrictMode -Version Latest
$ErrorActionPreference = 'Stop'

function Get-VerdictWord($whiteNoise) {
    if ($whiteNoise -eq $true) { return 'white noise' }
    if ($whiteNoise -eq $false) { return 'not white noise' }
    return 'no judgement'
}

function Format-Lags($lags) {
    if (-not $lags -or @($lags).Count -eq 0) { return 'none' }
    return (@($lags) -join ', ')
}

function Write-Problem($problem) {
    [Console]::Error.WriteLine("error $($problem.status) ($($problem.title)): $($problem.detail)")
    if ($problem.PSObject.Properties.Name -contains 'errors') {
        foreach ($e in $problem.errors) { [Console]::Error.WriteLine("  $($e.pointer): $($e.detail)") }
    }
}

$route = if ($Mode -eq 'batch') { '/v1/diagnostics/batch' } else { '/v1/diagnostics' }
$uri = $BaseUrl.TrimEnd('/') + $route
$headers = @{ Accept = 'application/json' }
if ($Token) { $headers['Authorization'] = "Bearer $Token" }
$body = [System.IO.File]::ReadAllText((Resolve-Path $Payload))

try {
    # -TimeoutSec bounds the exchange; without it Invoke-RestMethod may wait indefinitely.
    $answer = Invoke-RestMethod -Method Post -Uri $uri -Headers $headers -ContentType 'application/json' `
        -Body ([System.Text.Encoding]::UTF8.GetBytes($body)) -TimeoutSec $TimeoutSec
}
catch {
    $response = $null
    if ($_.Exception.PSObject.Properties.Name -contains 'Response') { $response = $_.Exception.Response }
    if ($null -eq $response) {
        [Console]::Error.WriteLine("error: no answer from $BaseUrl within $TimeoutSec s or could not connect: $($_.Exception.Message)")
        exit 3
    }
    # PowerShell 7 puts the error body in ErrorDetails; 5.1 leaves it in the response stream.
    $text = $null
    if ($_.ErrorDetails -and $_.ErrorDetails.Message) { $text = $_.ErrorDetails.Message }
    elseif ($response.PSObject.Methods.Name -contains 'GetResponseStream') {
        $reader = New-Object System.IO.StreamReader($response.GetResponseStream())
        $text = $reader.ReadToEnd()
    }
    try { Write-Problem ($text | ConvertFrom-Json) }
    catch { [Console]::Error.WriteLine("error $([int]$response.StatusCode): $text") }
    exit 2
}

if ($Mode -eq 'single') {
    if ($answer.name) { Write-Output $answer.name } else { Write-Output '(unnamed)' }
    Write-Output "verdict: $(Get-VerdictWord $answer.verdict.white_noise)"
    Write-Output "summary: $($answer.verdict.summary)"
    Write-Output "outside the band (ACF): $(Format-Lags $answer.acf.outside)"
    Write-Output "outside the band (PACF): $(Format-Lags $answer.pacf.outside)"
}
else {
    foreach ($r in $answer.results) {
        if ($r.PSObject.Properties.Name -contains 'error' -and $r.error) {
            Write-Output "$($r.id): error $($r.error.status): $($r.error.detail)"
        }
        else {
            Write-Output "$($r.id): $(Get-VerdictWord $r.verdict.white_noise); ACF outside: $(Format-Lags $r.acf.outside)"
        }
    }
    $s = $answer.summary
    Write-Output "summary: $($s.white_noise) white noise, $($s.not_white_noise) not white noise, $($s.undetermined) undetermined, $($s.errors) $(if ($s.errors -eq 1) { 'error' } else { 'errors' })"
}
exit 0
