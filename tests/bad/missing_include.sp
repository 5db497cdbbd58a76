* expect: 2 file not found
.include 'does/not/exist.sp'
