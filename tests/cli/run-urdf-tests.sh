#!/bin/sh
# URDF export against outside references: each sample arm exported with
# `twistfit export --as urdf` is parsed by urdfdom's check_urdf (Debian
# liburdfdom-tools), which must print the expected chain, and an Orocos
# KDL chain built from the file's joint origins and axes (Debian
# python3-pykdl, tests/cli/urdf_kdl.py) must give twistfit fk's flange to
# 1e-9 m and 1e-9 rad at 30 seeded configurations; `--like` must keep
# everything of the user's file off the chain (visuals, inertias, a
# comment, a joint off the chain) while its chain reproduces the model.
# Skips (77) only when check_urdf or PyKDL is missing.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
TWISTFIT="$BUILD/src/twistfit"
PY=/usr/bin/python3
KDL="$SRC/tests/cli/urdf_kdl.py"
command -v check_urdf >/dev/null 2>&1 || { echo "SKIP: check_urdf not installed (liburdfdom-tools)"; exit 77; }
"$PY" -c "import PyKDL" 2>/dev/null || { echo "SKIP: PyKDL not installed (python3-pykdl)"; exit 77; }
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
fails=0
fail() { echo "FAIL: $*"; fails=$((fails + 1)); }

for arm in tf6s tf6p tf4p tf7 tf6s-dh tf7-mdh; do
  m="$SRC/samples/$arm.ini"
  u="$work/$arm.urdf"
  "$TWISTFIT" export "$m" --as urdf -o "$u" || { fail "$arm: export failed"; continue; }
  # reference: urdfdom check_urdf (Debian liburdfdom-tools)
  check_urdf "$u" >"$work/check.txt" 2>&1 || { fail "$arm: check_urdf refused the file"; cat "$work/check.txt"; continue; }
  name=$(sed -n 's/^name = //p' "$m")
  grep -q "^robot name is: $name\$" "$work/check.txt" || fail "$arm: check_urdf names another robot"
  grep -q "^root Link: base_link has 1 child(ren)\$" "$work/check.txt" || fail "$arm: root is not base_link"
  # the chain in order, one level deeper each: j1_link ... flange
  links=$(sed -n 's/^\[joint \(.*\)\]$/\1_link/p' "$m") 
  depth=4
  for l in $links flange; do
    grep -q "^$(printf "%${depth}s" "")child(1):  $l\$" "$work/check.txt" || fail "$arm: check_urdf lacks $l at depth $depth"
    depth=$((depth + 4))
  done
  # reference: Orocos KDL (Debian python3-pykdl) on the file's origins and axes
  "$PY" "$KDL" joints "$u" 30 7 "$work/joints.csv" || { fail "$arm: no joint rows"; continue; }
  "$TWISTFIT" fk "$m" "$work/joints.csv" --angle-unit rad --length-unit m --output-length-unit m \
    >"$work/fk.csv" 2>/dev/null || { fail "$arm: fk failed"; continue; }
  "$PY" "$KDL" fk "$u" flange "$work/joints.csv" "$work/fk.csv" || fail "$arm: KDL on the URDF differs from fk"
  # and twistfit reads its own URDF back to the same figures
  "$TWISTFIT" fk "$u" "$work/joints.csv" --angle-unit rad --length-unit m --output-length-unit m \
    >"$work/fk2.csv" 2>/dev/null || { fail "$arm: fk of the URDF failed"; continue; }
  "$PY" "$KDL" fk "$u" flange "$work/joints.csv" "$work/fk2.csv" >/dev/null || fail "$arm: fk of the URDF differs"
done

# --like: the user's file with visuals, inertias, comments and a joint
# off the chain; the model a tilted, offset version of the file's chain.
cat >"$work/user.urdf" <<'XML'
<?xml version="1.0"?>
<!-- the user's description: this comment stays -->
<robot name="user_arm">
  <!-- a comment inside the robot stays too -->
  <link name="world"/>
  <link name="base">
    <inertial><mass value="12.5"/><inertia ixx="0.1" ixy="0" ixz="0" iyy="0.1" iyz="0" izz="0.1"/></inertial>
    <visual><geometry><cylinder radius="0.1" length="0.2"/></geometry></visual>
  </link>
  <joint name="mount" type="fixed"><parent link="world"/><child link="base"/><origin xyz="0 0 0.1"/></joint>
  <link name="upper"><visual><origin xyz="0 0 0.2"/><geometry><box size="0.08 0.08 0.4"/></geometry></visual></link>
  <joint name="shoulder" type="revolute">
    <parent link="base"/><child link="upper"/>
    <origin xyz="0 0 0.25" rpy="0 0 0.5"/><axis xyz="0 1 0"/>
    <limit lower="-2" upper="2" effort="80" velocity="1.5"/>
  </joint>
  <link name="fore"><collision><geometry><cylinder radius="0.04" length="0.35"/></geometry></collision></link>
  <joint name="elbow" type="revolute">
    <parent link="upper"/><child link="fore"/>
    <origin xyz="0 0 0.4"/><axis xyz="0 1 0"/>
    <limit lower="-2.5" upper="2.5" effort="40" velocity="2"/>
  </joint>
  <link name="hand"/>
  <joint name="wrist" type="continuous">
    <parent link="fore"/><child link="hand"/>
    <origin xyz="0 0 0.35"/><axis xyz="0 0 1"/>
  </joint>
  <link name="flange"/>
  <joint name="flange_mount" type="fixed"><parent link="hand"/><child link="flange"/><origin xyz="0 0 0.08" rpy="3.141592653589793 0 0"/></joint>
  <link name="lamp"/>
  <joint name="lamp_mount" type="fixed"><parent link="upper"/><child link="lamp"/><origin xyz="0.05 0 0.3"/></joint>
</robot>
XML
cat >"$work/model.ini" <<'INI'
[robot]
name = user_arm calibrated
length_unit = mm
angle_unit = deg
[joint shoulder]
type = revolute
axis = 0.0012 0.99999912 0.0004
point = 0.31 0.42 350.27
offset = 0.041
limits = -114.59 114.59
[joint elbow]
type = revolute
axis = 0.47943 0.8775 0.0023
point = 0.52 -0.38 750.61
offset = -0.027
[joint wrist]
type = revolute
axis = 0.0009 -0.0011 1
point = -0.18 0.33 1100.2
offset = 0.35
[home]
position = 0.27 0.11 1180.46
rotation_row1 = 1 0 0
rotation_row2 = 0 -1 0
rotation_row3 = 0 0 -1
INI
if "$TWISTFIT" export "$work/model.ini" --as urdf --like "$work/user.urdf" --tip-link flange -o "$work/out.urdf" 2>"$work/err.txt"; then
  # reference: urdfdom check_urdf (Debian liburdfdom-tools)
  check_urdf "$work/out.urdf" >/dev/null 2>&1 || fail "like: check_urdf refused the result"
  "$PY" "$KDL" same-except-chain "$work/user.urdf" "$work/out.urdf" shoulder elbow wrist flange_mount ||
    fail "like: something off the chain changed"
  grep -q '<!-- the user.s description: this comment stays -->' "$work/out.urdf" || fail "like: the leading comment was lost"
  "$PY" "$KDL" joints "$work/out.urdf" 30 11 "$work/joints.csv" flange
  "$TWISTFIT" fk "$work/model.ini" "$work/joints.csv" --angle-unit rad --length-unit m --output-length-unit m \
    >"$work/fk.csv" 2>/dev/null || fail "like: fk failed"
  # reference: Orocos KDL (Debian python3-pykdl) on the written chain
  "$PY" "$KDL" fk "$work/out.urdf" flange "$work/joints.csv" "$work/fk.csv" || fail "like: KDL on the result differs from fk"
else
  fail "like: export failed: $(cat "$work/err.txt")"
fi

[ "$fails" = 0 ] || exit 1
echo "urdf: every sample arm and the --like file agree with check_urdf and KDL"
