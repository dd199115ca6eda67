! Edge case 13: the same impedances in version 2, in ohms (R does not apply)
[Version] 2.0
# MHz Z MA R 75
[Number of Ports] 1
[Number of Frequencies] 2
[Network Data]
100  74.25  0
200  37.5   90
[End]
