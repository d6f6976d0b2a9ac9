UCLA pl 1.0

a   1  0 : N
b   6  2 : N
c  10  0 : FS
m1 12  4 : N
p1  0  5 : N /FIXED_NI
p2 20  1 : N /FIXED
