# bench/common.sh - helpers shared by the benchmark scripts (sourced).
now() { date +%s.%N; }
# median of whitespace-separated numbers
median() { printf '%s\n' $1 | sort -n | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }
# seconds taken by a command
elapsed() { s=$(now); "$@"; e=$(now); echo "$e - $s" | bc -l; }
