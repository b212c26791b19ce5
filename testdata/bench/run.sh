#!/usr/bin/env bash
# run.sh: the end-to-end benchmark of `convtag tag` against cat, jq and PyTorch.
#
#   testdata/bench/run.sh            # 1,000,000 records
#   testdata/bench/run.sh --quick    # 100,000 records
#   testdata/bench/run.sh -n 250000 --repeat 5 --jobs 2
#
# It (1) builds convtag, (2) generates an invented chat log with
# testdata/bench/genlog.go, plain and zstd, into the git-ignored
# testdata/cache/bench/, (3) runs each tool over it, timing wall clock and
# peak RSS, and (4) prints a table. Each figure is the best of --repeat runs
# (default 3): the machine is shared and noise only ever makes a run slower.
# Records/s and MB/s are counted on the uncompressed log for every input, so
# plain and zstd rows compare directly; "cpu s" is user + system time of that
# best run, to show what a loaded machine gave it. For a pipeline (zstd -dc | jq) the
# peak RSS is that of its largest process. Needs: go, jq, zstd, GNU time
# (Debian's `time`), and /usr/bin/python3 with python3-torch for the last row.
set -euo pipefail

cd "$(dirname "$0")/../.."
ROOT=$PWD
CACHE=$ROOT/testdata/cache/bench
N=1000000
REPEAT=3
JOBS=$(nproc)
SKIP_TORCH=0
while (($#)); do
	case $1 in
	--quick) N=100000 ;;
	-n) N=$2; shift ;;
	--repeat) REPEAT=$2; shift ;;
	--jobs | -j) JOBS=$2; shift ;;
	--no-torch) SKIP_TORCH=1 ;;
	-h | --help) awk 'NR > 1 && /^#/ { sub(/^# ?/, ""); print; next } NR > 1 { exit }' "$0"; exit 0 ;;
	*) echo "run.sh: unknown argument $1; try: run.sh --quick" >&2; exit 2 ;;
	esac
	shift
done
mkdir -p "$CACHE"


need() { command -v "$1" >/dev/null || { echo "run.sh: $1 not found; $2" >&2; exit 1; }; }
need go "install Go"
need jq "apt-get install jq"
need zstd "apt-get install zstd"
if [[ ! -x /usr/bin/time ]]; then
	echo "run.sh: installing GNU time (Debian package time)" >&2
	if ((EUID == 0)); then apt-get install -y -qq time >&2; else sudo apt-get install -y -qq time >&2; fi
fi

# (1) build
# CONVTAG=/path/to/binary skips the build (to compare versions).
if [[ -z ${CONVTAG:-} ]]; then
	CONVTAG=$CACHE/convtag
	echo "building convtag" >&2
	go build -o "$CONVTAG" ./cmd/convtag
fi
# tags MODEL-FLAGS...: does `convtag tag` really tag a record (a stub, a
# missing command or a missing model fails)?
tags() { [[ $(echo '{"text":"the 07:40 boat"}' | "$CONVTAG" tag "$@" 2>/dev/null) == *'"tag"'* ]]; }
HAVE_TAG=1 HAVE_BUILTIN=1
"$CONVTAG" tag --help >/dev/null 2>&1 || HAVE_TAG=0
tags || HAVE_BUILTIN=0

# (2) generate (cached by size; the generator is deterministic)
GEN=$CACHE/genlog
go build -o "$GEN" ./testdata/bench/genlog.go
# The name carries the generator's hash, so a changed generator makes a new log.
GENHASH=$(sha256sum testdata/bench/genlog.go | cut -c1-8)
LOG=$CACHE/log-$N-$GENHASH.jsonl
if [[ ! -s $LOG ]]; then
	echo "generating $LOG" >&2
	t0=$EPOCHREALTIME
	"$GEN" -n "$N" -seed 1 >"$LOG.tmp" && mv "$LOG.tmp" "$LOG"
	echo "genlog: $N records in $(awk -v a="$t0" -v b="$EPOCHREALTIME" 'BEGIN{printf "%.2f", b-a}') s" >&2
fi
if [[ ! -s $LOG.zst ]]; then
	zstd -q -f -T0 -3 "$LOG" -o "$LOG.zst.tmp" && mv "$LOG.zst.tmp" "$LOG.zst"
fi
BYTES=$(stat -c %s "$LOG")
# The archive workload: the same records in six files, three gzip and
# three zstd (as daily archives come), tagged into one -o out.jsonl.zst.
export CONVTAG
ARCH=$CACHE/archive-$N-$GENHASH
if [[ ! -s $ARCH/part6.jsonl.zst ]]; then
	mkdir -p "$ARCH"
	split -n l/6 -d -a 1 "$LOG" "$ARCH/part"
	for i in 0 1 2; do gzip -c -6 "$ARCH/part$i" >"$ARCH/part$((i + 1)).jsonl.gz"; done
	for i in 3 4 5; do zstd -q -f -3 "$ARCH/part$i" -o "$ARCH/part$((i + 1)).jsonl.zst"; done
	rm -f "$ARCH"/part[0-5]
fi
ARCHIVE=("$ARCH"/part1.jsonl.gz "$ARCH"/part2.jsonl.gz "$ARCH"/part3.jsonl.gz "$ARCH"/part4.jsonl.zst "$ARCH"/part5.jsonl.zst "$ARCH"/part6.jsonl.zst)
# decode_archive: every archive file's records, in order, on stdout.
decode_archive='for f in "$@"; do case $f in *.gz) gzip -dc "$f" ;; *) zstd -dc "$f" ;; esac; done'

# measure NAME INPUT CMD...: best wall time of $REPEAT runs (bash's
# EPOCHREALTIME, microseconds) and the largest peak RSS (GNU time %M, KiB).
# The command reads its input itself and writes to /dev/null.
RESULTS=()
measure() {
	local name=$1 input=$2 best="" rss=0 cpu="" t0 t1 dt m c
	shift 2
	for ((r = 0; r < REPEAT; r++)); do
		t0=$EPOCHREALTIME
		if ! /usr/bin/time -f "%e %M %U %S" -o "$CACHE/time.out" "$@" >/dev/null; then
			na "$name" "$input" "failed: $*"
			return 0
		fi
		t1=$EPOCHREALTIME
		dt=$(awk -v a="$t0" -v b="$t1" 'BEGIN{printf "%.6f", b-a}')
		m=$(awk 'END{print $2}' "$CACHE/time.out")
		c=$(awk 'END{printf "%.2f", $3+$4}' "$CACHE/time.out")
		if [[ -z $best ]] || awk -v a="$dt" -v b="$best" 'BEGIN{exit !(a<b)}'; then best=$dt cpu=$c; fi
		((m > rss)) && rss=$m
	done
	RESULTS+=("$name|$input|$best|$rss|$cpu")
	echo "  $name ($input): ${best}s, ${rss} KiB, ${cpu} cpu s" >&2
}
na() { RESULTS+=("$1|$2|n/a|n/a|n/a"); echo "  $1 ($2): n/a, $3" >&2; }

# first_output CMD...: seconds from start to the first byte of output.
first_output() {
	local t0=$EPOCHREALTIME
	"$@" | head -c 1 >/dev/null
	awk -v a="$t0" -v b="$EPOCHREALTIME" 'BEGIN{printf "%.4f", b-a}'
}

echo "measuring on $N records, $BYTES bytes, best of $REPEAT, -j $JOBS" >&2
measure cat plain cat "$LOG"
measure cat zstd bash -c 'zstd -dc "$1"' _ "$LOG.zst"
measure "jq -c ." plain jq -c . "$LOG"
measure "jq -c ." zstd bash -c 'zstd -dc "$1" | jq -c .' _ "$LOG.zst"
measure "jq -c ." archive bash -c "($decode_archive) | jq -c . | zstd -q -c" _ "${ARCHIVE[@]}"

D300=$CACHE/model-d300-v50000-$GENHASH # + -f32/-f16.safetensors; delete to remake
FIRST_BUILTIN=n/a FIRST_D300=""
if ((HAVE_TAG)); then
	if ((HAVE_BUILTIN)); then
		measure "convtag built-in" plain "$CONVTAG" tag -j "$JOBS" "$LOG"
		measure "convtag built-in" zstd "$CONVTAG" tag -j "$JOBS" "$LOG.zst"
		FIRST_BUILTIN=$(first_output "$CONVTAG" tag -j "$JOBS" "$LOG")
		measure "convtag built-in" archive "$CONVTAG" tag -j "$JOBS" -o "$CACHE/out.jsonl.zst" "${ARCHIVE[@]}"
		measure "convtag in a pipe" archive bash -c "($decode_archive) | \"\$CONVTAG\" tag -j $JOBS | zstd -q -c" _ "${ARCHIVE[@]}"
		rm -f "$CACHE/out.jsonl.zst"
	else
		na "convtag built-in" plain "the built-in model does not tag yet"
		na "convtag built-in" zstd "the built-in model does not tag yet"
	fi
	# Tagging speed depends on a model's shape, not on how well it was
	# trained, so the d=300 models are built untrained (random weights over the
	# generator's 50,000 most frequent words, folded) with mkmodel.go, in
	# single (F32) and half (F16, --fold-half in train) precision.
	for prec in f32 f16; do
		M=$D300-$prec.safetensors
		if [[ ! -s $M ]]; then
			[[ -s $CACHE/words-50000.txt ]] || "$GEN" -words -vocab 50000 >"$CACHE/words-50000.txt"
			half=false
			[[ $prec == f16 ]] && half=true
			echo "building the d=300 $prec model" >&2
			go run ./testdata/bench/mkmodel.go -words "$CACHE/words-50000.txt" -dim 300 -filters 100 \
				-widths 3,4,5 -half=$half -o "$M.tmp" && mv "$M.tmp" "$M"
		fi
		if [[ -s $M ]] && tags -m "$M"; then
			measure "convtag d=300 $prec" plain "$CONVTAG" tag -m "$M" -j "$JOBS" "$LOG"
			measure "convtag d=300 $prec" zstd "$CONVTAG" tag -m "$M" -j "$JOBS" "$LOG.zst"
			FIRST_D300="$FIRST_D300 $prec $(first_output "$CONVTAG" tag -m "$M" -j "$JOBS" "$LOG")"
		else
			na "convtag d=300 $prec" plain "no model"
			na "convtag d=300 $prec" zstd "no model"
		fi
	done
else
	for t in "convtag built-in" "convtag d=300 f32" "convtag d=300 f16"; do
		na "$t" plain "convtag tag not available yet"
		na "$t" zstd "convtag tag not available yet"
	done
fi

TORCH=n/a TORCH_CPU=n/a
if ((!SKIP_TORCH)); then
	echo "  pytorch d=300 (pre-tokenized ids, $N sentences)" >&2
	if out=$(/usr/bin/python3 testdata/bench/torch_bench.py -n "$N" --threads 2 --batch 64); then
		echo "  $out" >&2
		TORCH=$(sed -n 's/.*sentences_per_s=\([0-9]*\).*/\1/p' <<<"$out")
		TORCH_CPU=$(sed -n 's/.*cpu_seconds=\([0-9.]*\).*/\1/p' <<<"$out")
	else
		echo "run.sh: torch_bench.py failed (python3-torch installed?)" >&2
	fi
fi

# (4) table
printf '\nconvtag benchmark: %d records, %.1f MB uncompressed, best of %d, -j %s, %s\n' \
	"$N" "$(awk -v b="$BYTES" 'BEGIN{print b/1e6}')" "$REPEAT" "$JOBS" "$(date -u +%FT%TZ)"
printf '%-20s %-7s %12s %9s %13s %7s %6s %9s %11s\n' tool input records/s MB/s "peak RSS MB" "cpu s" cores "vs jq" "cpu vs jq"
declare -A JQ JQCPU
for row in "${RESULTS[@]}"; do
	IFS='|' read -r name input secs rss cpu <<<"$row"
	[[ $name == "jq -c ." ]] && JQ[$input]=$secs JQCPU[$input]=$cpu
done
D300_RPS=""
for row in "${RESULTS[@]}"; do
	IFS='|' read -r name input secs rss cpu <<<"$row"
	if [[ $secs == n/a ]]; then
		printf '%-20s %-7s %12s %9s %13s %7s %6s %9s %11s\n' "$name" "$input" n/a n/a n/a n/a n/a n/a n/a
		continue
	fi
	awk -v n="$N" -v b="$BYTES" -v s="$secs" -v k="$rss" -v j="${JQ[$input]:-}" -v jc="${JQCPU[$input]:-}" -v name="$name" -v inp="$input" -v c="$cpu" 'BEGIN{
		ratio = (j == "" ? "n/a" : sprintf("%.2fx", j / s))
		cratio = (jc == "" || c == 0 ? "n/a" : sprintf("%.2fx", c / jc))
		printf "%-20s %-7s %12.0f %9.1f %13.1f %7s %6.2f %9s %11s\n", name, inp, n / s, b / s / 1e6, k / 1024, c, c / s, ratio, cratio }'
	[[ $name == "convtag d=300 f16" && $input == plain ]] && D300_RPS=$(awk -v n="$N" -v s="$secs" 'BEGIN{printf "%.0f", n/s}')
done
printf '%-20s %-7s %12s %9s %13s %7s\n' "pytorch d=300" ids "$TORCH" - - "$TORCH_CPU"
printf '\non zstd input the cat row is `zstd -dc`, and jq reads from `zstd -dc |`; d=300 models: untrained, 50,000 words + 10,000 buckets, folded\n'
printf 'archive: the records in 3 .jsonl.gz + 3 .jsonl.zst files, written as zstd (convtag -o out.jsonl.zst; jq and "convtag in a pipe": gzip/zstd -dc | ... | zstd -q -c)\n'
printf 'cores: cpu s / wall s; cpu vs jq: CPU seconds per record against jq on the same input (lower is cheaper)\n'
printf 'first output (s): built-in %s,%s\n' "$FIRST_BUILTIN" "${FIRST_D300:- d=300 n/a}"
if [[ -n $D300_RPS && $TORCH != n/a ]]; then
	awk -v a="$D300_RPS" -v b="$TORCH" 'BEGIN{printf "convtag d=300 f16 / pytorch d=300: %.1fx (sentences/s)\n", a / b}'
fi
