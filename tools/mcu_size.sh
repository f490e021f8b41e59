#!/usr/bin/env bash
# Code size of the generated float solvers on a Cortex-M4F (not run in CI).
#
# For every <arm>/<arm>_ik_f32.c under the generated folder (default: the repo's generated/),
# cross-compiles the object alone with Debian's gcc-arm-none-eabi
#   arm-none-eabi-gcc -mcpu=cortex-m4 -mthumb -mfloat-abi=hard -mfpu=fpv4-sp-d16 -Os -std=c99 -c
# and prints one table: the sizes of the object's sections (arm-none-eabi-size -A; libm and
# libgcc are not linked, so their code is not counted), the size of each solver function
# (arm-none-eabi-nm -S), and the outside symbols the object calls (arm-none-eabi-nm -u): the
# maths library (atan2f, sqrtf, ...) and any libgcc helper (__aeabi_d*: software double
# arithmetic, which a float build should not need on a single-precision FPU).
#
# Usage:   tools/mcu_size.sh [GENERATED_DIR]
# Install: apt-get install -y gcc-arm-none-eabi   (as root, Debian)
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
folder="${1:-$here/../generated}"
cc="${ARM_CC:-arm-none-eabi-gcc}"
size="${ARM_SIZE:-arm-none-eabi-size}"
nm="${ARM_NM:-arm-none-eabi-nm}"
flags=(-mcpu=cortex-m4 -mthumb -mfloat-abi=hard -mfpu=fpv4-sp-d16 -Os -std=c99 -c)
goal=8192

if [ "$#" -gt 1 ]; then
    echo "mcu_size: expected at most one argument (the generated folder), got $#" >&2
    exit 2
fi
for tool in "$cc" "$size" "$nm"; do
    if ! command -v "$tool" >/dev/null 2>&1; then
        echo "mcu_size: '$tool' not found; install Debian's cross compiler: apt-get install -y gcc-arm-none-eabi" >&2
        exit 2
    fi
done
if [ ! -d "$folder" ]; then
    echo "mcu_size: '$folder' is not a folder; expected the generated folder (one subfolder per arm)" >&2
    exit 2
fi
shopt -s nullglob
sources=("$folder"/*/*_ik_f32.c)
if [ "${#sources[@]}" -eq 0 ]; then
    echo "mcu_size: no <arm>/<arm>_ik_f32.c under '$folder'; run 'ikgen generate' first" >&2
    exit 2
fi

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

# section size from `size -A` output (0 when absent)
section() { awk -v name="$1" '$1 == name { print $2; found = 1 } END { if (!found) print 0 }' "$2"; }
# function size (decimal) from `nm -S` output (0 when absent)
function_size() {
    local hex
    hex="$(awk -v name="$1" '$4 == name { print $2 }' "$2")"
    echo $((16#${hex:-0}))
}

echo "compiler: $("$cc" --version | head -n 1)"
echo "flags:    ${flags[*]}"
echo
printf '%-12s %8s %8s %8s %6s %6s %10s %10s %9s  %-s\n' \
    arm .text KiB .rodata .data .bss inverse forward "<= 8 KiB" "outside symbols called"
for source in "${sources[@]}"; do
    name="$(basename "$source" _ik_f32.c)"
    object="$work/$name.o"
    if ! "$cc" "${flags[@]}" -I"$(dirname "$source")" "$source" -o "$object" 2>"$work/$name.log"; then
        echo "mcu_size: compiling $source failed:" >&2
        cat "$work/$name.log" >&2
        exit 1
    fi
    if [ -s "$work/$name.log" ]; then
        cat "$work/$name.log" >&2
    fi
    "$size" -A "$object" >"$work/$name.size"
    "$nm" -S "$object" >"$work/$name.nm"
    text="$(section .text "$work/$name.size")"
    rodata="$(section .rodata "$work/$name.size")"
    data="$(section .data "$work/$name.size")"
    bss="$(section .bss "$work/$name.size")"
    inverse="$(function_size "${name}_ik_f32_inverse" "$work/$name.nm")"
    forward="$(function_size "${name}_ik_f32_forward" "$work/$name.nm")"
    calls="$("$nm" -u "$object" | awk '{ print $2 }' | sort | tr '\n' ' ')"
    if [ "$text" -le "$goal" ]; then verdict=yes; else verdict=no; fi
    printf '%-12s %8d %8.2f %8d %6d %6d %10d %10d %9s  %-s\n' \
        "$name" "$text" "$(awk -v b="$text" 'BEGIN { print b / 1024 }')" "$rodata" "$data" "$bss" "$inverse" "$forward" \
        "$verdict" "$calls"
done
echo
echo "Sizes in bytes of the object alone (libm and libgcc not linked). .text holds the code and its"
echo "literal pools; inverse/forward are the sizes of those functions (arm-none-eabi-nm -S)."
