front_c,centre_c,back_c
