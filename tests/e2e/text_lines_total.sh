#!/usr/bin/env bash
# End to end through the text-line variant (PROTOCOL.md §5): accrue-sim
# --text-lines prints a 2-channel board's identity, samples and events as
# checksummed lines; accrued reads them with "protocol": "text_lines". Same
# checks as multichannel_total.sh (it runs that script in this mode).
set -euo pipefail
exec "$(dirname "$0")/multichannel_total.sh" "$1" "$2" "$3" text_lines
