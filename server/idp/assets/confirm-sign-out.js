document.getElementById('confirm-signout')?.click();
