#!/usr/bin/env bash
# The container's publish step, exactly; the test suite runs this same script and smoke-tests its output.
set -euo pipefail
out=${1:?usage: docker/publish.sh OUTPUT-DIR}
cd "$(dirname "$0")/.."
dotnet publish service/Strayspot.Service.csproj -c Release -o "$out" --no-self-contained -p:UseAppHost=true -p:DebugType=none
